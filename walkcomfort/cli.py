"""The ``walkcomfort`` command: a thin shell over the library.

Each verb lives in the ``commands.py`` module of the stage it belongs to and is
imported only when used, so ``walkcomfort --help`` stays fast and a missing
optional dependency affects only its own verb.

Errors: a :class:`~walkcomfort.errors.WalkcomfortError` is printed as one line
(``error: <where>: <what>. Fix: <how>.``) and exits with code 2, and so does an
``OSError`` naming a path (a folder that cannot be written, a full disk); anything
else is reported as an internal error in one line, exit code 1. ``--verbose`` adds the
traceback in both cases.
"""

from __future__ import annotations

import importlib
import sys

import click

from walkcomfort import __version__
from walkcomfort.errors import WalkcomfortError

# verb -> (module, attribute, one-line help). Order is the order of the data flow.
VERBS: dict[str, tuple[str, str, str]] = {
    "new-session": ("walkcomfort.session.commands", "new_session",
                    "Start a session folder from the field templates, for the instruments carried."),
    "check": ("walkcomfort.session.commands", "check", "Validate a session folder; write nothing."),
    "ingest": ("walkcomfort.session.commands", "ingest", "Align one or many session folders on one timeline with QA."),
    "scene": ("walkcomfort.environment.commands", "scene", "Build a scene GeoJSON from a local OpenStreetMap extract."),
    "thermal": ("walkcomfort.environment.commands", "thermal", "Add sun, shade, sky view, Tmrt and UTCI to timelines."),
    "frames": ("walkcomfort.imagery.commands", "frames", "Compute camera-frame cues (sky, greenery, people, quality)."),
    "share": ("walkcomfort.imagery.commands", "share", "Write a shareable copy of a session: faces blurred, track ends trimmed."),
    "fit": ("walkcomfort.model.commands", "fit", "Fit the comfort model on labelled timelines; validate by walker."),
    "evaluate": ("walkcomfort.model.commands", "evaluate", "Score a saved model bundle on labelled timelines."),
    "route": ("walkcomfort.routes.commands", "route", "Predict comfort along one planned route."),
    "compare": ("walkcomfort.routes.commands", "compare", "Compare shade schemes along a planned route."),
    "advise": ("walkcomfort.routes.placement.commands", "advise",
               "Choose where trees or canopy panels help most, for a budget."),
    "network": ("walkcomfort.network.commands", "network", "Batch every street segment x hour x scheme."),
    "map": ("walkcomfort.report.commands", "map_", "Write the HTML route map."),
    "report": ("walkcomfort.report.commands", "report", "Write HTML session or model reports."),
    "brief": ("walkcomfort.report.commands", "brief", "Write a one-page printable brief per route comparison."),
    "demo": ("walkcomfort.demo.commands", "demo", "Run the whole chain on the invented demo town."),
}


class _LazyGroup(click.Group):
    def list_commands(self, ctx):
        return list(VERBS)

    def get_command(self, ctx, name):
        if name not in VERBS:
            return None
        module, attr, short = VERBS[name]
        try:
            cmd = getattr(importlib.import_module(module), attr)
        except (ImportError, AttributeError) as exc:
            missing = getattr(exc, "name", None) or str(exc)

            @click.command(name=name, help=short, context_settings={"ignore_unknown_options": True})
            @click.argument("args", nargs=-1, type=click.UNPROCESSED)
            def unavailable(args):
                raise WalkcomfortError(f"the '{name}' command is not available ({missing})",
                                       fix="reinstall with: pip install -e '.[test]'")

            return unavailable
        cmd.name = name
        if not cmd.short_help:
            cmd.short_help = short
        return cmd


@click.group(cls=_LazyGroup, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="walkcomfort")
@click.option("--verbose", "-v", is_flag=True, help="Show full tracebacks on errors.")
@click.pass_context
def cli(ctx, verbose):
    """Pedestrian outdoor comfort: field walks in, comfort along planned routes out.

    Heat caution: field walks in heat follow field_protocol/safety.md and local
    occupational-health guidance. Predictions are planning estimates, not a
    heat-safety assessment: design decisions follow local codes and licensed practice.
    """
    ctx.ensure_object(dict)
    ctx.obj["verbose"] = verbose


def main(argv: list[str] | None = None) -> int:
    """Entry point: run the CLI and turn errors into one line and an exit code."""
    args = list(sys.argv[1:] if argv is None else argv)
    verbose = "--verbose" in args or "-v" in args
    try:
        rv = cli.main(args=args, prog_name="walkcomfort", standalone_mode=False)
        # click returns (not raises) a verb's ``click.exceptions.Exit`` code when not standalone
        if isinstance(rv, int) and not isinstance(rv, bool) and rv:
            return rv
    except click.exceptions.Abort:
        click.echo("error: aborted.", err=True)
        return 130
    except click.exceptions.Exit as exc:
        return exc.exit_code
    except click.UsageError as exc:  # a missing or bad option: say which verb and where its help is
        path = exc.ctx.command_path if exc.ctx is not None else "walkcomfort"
        msg = " ".join(exc.format_message().split()).rstrip(".")
        click.echo(f"error: {path}: {msg}. Fix: see `{path} --help`.", err=True)
        return 2
    except click.ClickException as exc:
        click.echo(f"error: {exc.format_message()}", err=True)
        return 2
    except WalkcomfortError as exc:
        _show_traceback(exc, verbose)
        click.echo(f"error: {exc.one_line()}", err=True)
        return 2
    except KeyboardInterrupt:
        click.echo("error: interrupted.", err=True)
        return 130
    except OSError as exc:
        if not getattr(exc, "filename", None):
            return _internal(exc, verbose)
        # a path that cannot be read or written (missing folder, a file in the way, no permission,
        # full disk): the user's environment, not a bug
        _show_traceback(exc, verbose)
        reason = exc.strerror or type(exc).__name__
        click.echo(f"error: {exc.filename}: {reason}. Fix: check the path, that you may write there "
                   "(-o/--out) and that the disk has room.", err=True)
        return 2
    except Exception as exc:  # an internal error: still one line unless --verbose
        return _internal(exc, verbose)
    return 0


def _show_traceback(exc: BaseException, verbose: bool) -> None:
    """With ``--verbose`` only: the full traceback on stderr, before the one-line message."""
    if verbose:
        import traceback

        click.echo("".join(traceback.format_exception(exc)).rstrip("\n"), err=True)


def _internal(exc: BaseException, verbose: bool) -> int:
    """Report an unexpected error in one line (traceback with --verbose); exit code 1."""
    _show_traceback(exc, verbose)
    msg = " ".join(str(exc).split())
    click.echo(f"internal error: {type(exc).__name__}: {msg} (run with --verbose for the traceback "
               "and please report it).", err=True)
    return 1


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
