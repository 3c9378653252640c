"""``walkcomfort check`` (validate, write nothing) and ``walkcomfort ingest`` (write timelines + QA)."""

from __future__ import annotations

from pathlib import Path

import click

from walkcomfort.errors import InputError, WalkcomfortError
from walkcomfort.session.manifest import MANIFEST_NAME


def find_sessions(paths) -> list[Path]:
    """Session folders from the arguments: a folder with ``session.toml``, or a folder of such folders."""
    out: list[Path] = []
    for p in map(Path, paths):
        if (p / MANIFEST_NAME).is_file() or p.name == MANIFEST_NAME:
            out.append(p if p.is_dir() else p.parent)
            continue
        if not p.exists():
            raise InputError(f"'{p}' does not exist", fix="give a session folder (holding session.toml)")
        subs = sorted(d for d in p.iterdir() if d.is_dir() and (d / MANIFEST_NAME).is_file()) if p.is_dir() else []
        if not subs:
            raise InputError(f"no {MANIFEST_NAME} in '{p}' nor in its sub-folders", where=p,
                             fix="give a session folder (holding session.toml) or a folder of them")
        out.extend(subs)
    return out


def summary_lines(tl) -> list[str]:
    """Human summary of one timeline: the window, counts per source (read = used + quarantined), issues."""
    qa = tl.qa
    s = qa["summary"]
    t = qa["timeline"]
    lines = [f"{qa['walk_id']}: {t['rows']} steps of {t['step_s']:g} s, {t['start']} … {t['end']}"]
    for name, e in qa["sources"].items():
        ok = "ok" if e["reconciles"] else "DOES NOT RECONCILE"
        reasons = ", ".join(f"{k} {v}" for k, v in e["quarantine_reasons"].items())
        lines.append(f"  {name:<8} {e['rows_read']} read = {e['rows_used']} used + {e['rows_quarantined']} "
                     f"quarantined ({ok})" + (f" [{reasons}]" if reasons else ""))
    lines.append(f"  issues: gaps {s['gaps']}, out of range {s['out_of_range_rows']}, duplicates "
                 f"{s['duplicate_rows']}, out of order {s['out_of_order_rows']}, GPS jumps {s['gps_jumps']}, "
                 f"clock corrections {s['clock_corrections']} (max residual {s['max_clock_residual_s']:.3f} s)")
    for w in qa.get("warnings", []):
        lines.append(f"  warning: {w}")
    return lines


def _options(f):
    f = click.option("--step", "step_s", type=float, default=1.0, show_default=True,
                     help="Time step of the timeline [s].")(f)
    f = click.option("--max-gap", "max_gap_s", type=float, default=10.0, show_default=True,
                     help="Longest spacing of readings interpolated across [s].")(f)
    f = click.option("--lag-correction", is_flag=True, help="Correct air/globe temperature for sensor lag (τ from the manifest).")(f)
    f = click.option("--accept-losses", is_flag=True,
                     help="Proceed although a source loses more rows than [checks] allows (recorded in qa.json).")(f)
    f = click.option("--quarantine-to", "quarantine_to", type=click.Path(path_type=Path), default=None,
                     help="Where to write the quarantine table of a refused session (ingest: OUT/refused/).")(f)
    return f


def _build(d, step_s, max_gap_s, lag_correction, accept_losses, quarantine_to):
    """Build one timeline; a refused session prints its reason counts and writes its quarantine table first."""
    from walkcomfort.session.losses import SessionRefused
    from walkcomfort.session.timeline import build_timeline

    try:
        return build_timeline(d, step_s=step_s, max_gap_s=max_gap_s, lag_correction=lag_correction,
                              accept_losses=True if accept_losses else None)
    except SessionRefused as exc:
        write_refused(exc, d, quarantine_to)
        raise


def write_refused(exc, session_dir, folder) -> Path | None:
    """Print the quarantine reason counts of a refused session and write its table (and QA) to ``folder``."""
    from walkcomfort import _io

    q = exc.quarantine
    if q is None:
        return None
    counts = q.groupby(["source", "reason"]).size() if len(q) else {}
    click.echo(f"{exc.walk_id or Path(session_dir).name}: refused; {len(q)} row(s) set aside so far")
    for (src, reason), n in sorted(dict(counts).items()):
        click.echo(f"  {src:<8} {reason} {int(n)}")
    if folder is None:
        return None
    out = Path(folder) / (exc.walk_id or Path(session_dir).name)
    p = _io.write_csv(out / "quarantine.csv", q, index=False)
    if exc.qa is not None:
        _io.write_json(out / "qa.json", exc.qa)
    click.echo(f"  wrote {p}")
    return p


@click.command()
@click.argument("session_dirs", nargs=-1, required=True, type=click.Path(path_type=Path))
@_options
def check(session_dirs, step_s, max_gap_s, lag_correction, accept_losses, quarantine_to):
    """Validate session folder(s): manifest, every file, QA counts, losses. Writes nothing (but --quarantine-to)."""
    for d in find_sessions(session_dirs):
        tl = _build(d, step_s, max_gap_s, lag_correction, accept_losses, quarantine_to)
        for line in summary_lines(tl):
            click.echo(line)
        if not tl.qa["summary"]["reconciles"]:  # pragma: no cover - would be a bug
            raise WalkcomfortError("row counts do not reconcile", where=d, fix="please report this")
    click.echo("check passed: nothing was written." if not quarantine_to else "check passed.")


@click.command()
@click.argument("session_dirs", nargs=-1, required=True, type=click.Path(path_type=Path))
@click.option("--out", "-o", "out_dir", required=True, type=click.Path(path_type=Path),
              help="Output folder; each walk goes to OUT/<walk_id>/.")
@_options
@click.option("--csv", "write_csv", is_flag=True, help="Also write timeline.csv.")
@click.option("--campaign", is_flag=True, help="Also write OUT/campaign.parquet stacking every walk.")
@click.option("--keep-going", is_flag=True, help="Report a failing session and go on with the others.")
def ingest(session_dirs, out_dir, step_s, max_gap_s, lag_correction, accept_losses, quarantine_to, write_csv,
           campaign, keep_going):
    """Align one or many session folders on one timeline each; write timeline, QA and quarantine.

    A refused session writes no timeline; its quarantine table goes to OUT/refused/<walk_id>/
    (or --quarantine-to) so the reasons can be read.
    """
    from walkcomfort import _io
    from walkcomfort._progress import track
    from walkcomfort.session.heat_safety import walk_heat_safety
    from walkcomfort.session.timeline import combine_campaign

    sessions = find_sessions(session_dirs)
    done, failed = [], []
    for d in track(sessions, "ingest", total=len(sessions), enabled=None if len(sessions) > 1 else False):
        try:
            tl = _build(d, step_s, max_gap_s, lag_correction, accept_losses,
                        quarantine_to or Path(out_dir) / "refused")
        except WalkcomfortError as exc:
            if not keep_going:
                raise
            failed.append(d)
            click.echo(f"error: {exc.one_line()}", err=True)
            continue
        if tl.walk_id in {t.walk_id for t in done}:
            raise InputError(f"walk id '{tl.walk_id}' is used by two sessions", where=d / MANIFEST_NAME,
                             fix="give each session its own [session] id")
        tl.qa["heat_safety"] = walk_heat_safety(tl.data)  # WBGT minutes above the walker's limit
        paths = tl.write(out_dir, csv=write_csv)
        done.append(tl)
        for line in summary_lines(tl):
            click.echo(line)
        if tl.qa["heat_safety"]["caution"]:
            click.echo(f"  {tl.qa['heat_safety']['caution']}")
        click.echo(f"  wrote {paths['timeline'].parent}")
    if campaign and done:
        table = combine_campaign(done)
        sessions_meta = table.attrs.pop("sessions")
        p = _io.write_parquet(Path(out_dir) / "campaign.parquet", table,
                              {"sessions": sessions_meta, "provenance": {k: t.provenance for k, t in
                                                                         ((t.walk_id, t) for t in done)}})
        click.echo(f"campaign: {len(done)} walks, {len(table)} rows -> {p}")
    if failed:
        raise WalkcomfortError(f"{len(failed)} of {len(sessions)} sessions failed (first: {failed[0]})",
                               fix="see the error lines above")


@click.command("new-session")
@click.argument("folder", type=click.Path(path_type=Path))
@click.option("--weather/--no-weather", default=True, show_default=True, help="A weather logger with a globe was carried.")
@click.option("--sound/--no-sound", default=True, show_default=True, help="A sound level meter was carried.")
@click.option("--light/--no-light", default=True, show_default=True, help="A light meter was carried.")
@click.option("--camera/--no-camera", default=True, show_default=True, help="A chest camera was carried.")
@click.option("--votes/--no-votes", default=True, show_default=True, help="Comfort votes were taken.")
@click.option("--id", "session_id", default=None, help="Session id (default: the folder name).")
@click.option("--participant", default=None, help="The participant's code (never a name).")
@click.option("--timezone", default=None, help="IANA zone of the site, e.g. Europe/Madrid.")
@click.option("--templates", type=click.Path(path_type=Path), default=None,
              help="The field_protocol/templates folder (default: the repository's).")
def new_session(folder, weather, sound, light, camera, votes, session_id, participant, timezone, templates):
    """Start a session folder from the field templates, for the instruments carried (the GPS always)."""
    from walkcomfort.session.new import new_session as make

    carried = {"weather": weather, "sound": sound, "light": light, "camera": camera, "votes": votes}
    written = make(folder, carried, session_id=session_id, participant=participant, timezone=timezone,
                   templates=templates)
    for p in written:
        click.echo(f"wrote {p}")
    left = ", ".join(k for k, v in carried.items() if not v) or "none"
    click.echo(f"instruments left out: {left}. Next: copy each device's export over the files named in "
               f"{Path(folder) / MANIFEST_NAME}, correct every value marked CHANGE, then run "
               f"`walkcomfort check {folder}`.")
