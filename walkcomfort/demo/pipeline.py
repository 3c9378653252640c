"""The whole chain on the invented demo town, stage by stage.

``run_demo(out_dir)`` runs ingest → frame cues → thermal environment → model fit →
route comparison under the shade schemes → map and reports on ``demo_walks/``. Each stage
is the stage's own public command (the same verb a user would type, called in this
process). A stage that cannot be imported or that breaks is reported as failed (the
rest still run and ``walkcomfort demo`` exits non-zero); a stage whose input did not come
out of an earlier stage is reported as skipped with the reason. Outputs go to one folder per stage under ``out_dir``.

The data are invented (see ``demo_walks/README.md``); the outputs are a demonstration
of the tool, not findings and not design advice.
"""

from __future__ import annotations

import importlib
import importlib.util
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

CAUTION = ("Caution: the demo data are INVENTED (an invented town, invented walkers, invented comfort "
           "votes); nothing here is a finding or design advice. Real heat exposure on field walks needs "
           "water, shade breaks and stop rules: follow local occupational-health guidance, your ethics "
           "approval, and local codes and licensed practice for any design decision.")

ROUTES = ("estacio-escola", "mercat-parc")
DEPARTURES = ("09:00", "19:00", "2h")     # local clock times on the design day, every 2 h
NETWORK_HOURS = ("13:00", "17:00", "2h")  # the network batch: three afternoon hours


@dataclass
class StageResult:
    name: str
    status: str                 # "ran" | "skipped" | "failed"
    detail: str = ""
    outputs: list = field(default_factory=list)
    seconds: float = 0.0


@dataclass
class DemoRun:
    out_dir: Path
    demo_dir: Path
    stages: list = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not any(s.status == "failed" for s in self.stages)

    def stage(self, name: str) -> StageResult | None:
        return next((s for s in self.stages if s.name == name), None)


def default_demo_dir() -> Path:
    """``demo_walks/`` next to the package (a clone) or in the working folder."""
    import walkcomfort

    here = Path(walkcomfort.__file__).resolve().parents[1] / "demo_walks"
    if (here / "planted.json").is_file():
        return here
    return Path.cwd() / "demo_walks"


#: The stage commands the demo runs: the CLI's own verbs (``walkcomfort.cli.VERBS``; a test
#: checks they agree), called directly so the demo does not import the CLI that sits above it.
STAGE_COMMANDS: dict[str, tuple[str, str]] = {
    "ingest": ("walkcomfort.session.commands", "ingest"),
    "frames": ("walkcomfort.imagery.commands", "frames"),
    "thermal": ("walkcomfort.environment.commands", "thermal"),
    "fit": ("walkcomfort.model.commands", "fit"),
    "compare": ("walkcomfort.routes.commands", "compare"),
    "network": ("walkcomfort.network.commands", "network"),
    "map": ("walkcomfort.report.commands", "map_"),
    "report": ("walkcomfort.report.commands", "report"),
}


def _has_verb(verb: str) -> tuple[bool, str]:
    module, attr = STAGE_COMMANDS[verb]
    try:
        if importlib.util.find_spec(module) is None:
            return False, f"{module} is missing from this installation"
    except ModuleNotFoundError:
        return False, f"{module} is missing from this installation"
    try:
        mod = importlib.import_module(module)
    except ImportError as exc:
        return False, f"{module} cannot be imported ({exc})"
    if not hasattr(mod, attr):
        return False, f"{module} has no '{attr}' command"
    return True, ""


def _run_verb(verb: str, args: list[str], echo: Callable[[str], None]) -> None:
    """Run one walkcomfort verb in this process (errors propagate as WalkcomfortError)."""
    module, attr = STAGE_COMMANDS[verb]
    command = getattr(importlib.import_module(module), attr)
    echo(f"$ walkcomfort {verb} " + " ".join(args))
    command.main(args=list(args), prog_name=f"walkcomfort {verb}", standalone_mode=False, obj={"verbose": False})


def _fit_has_option(name: str) -> bool:
    """Whether the model stage's fit command takes an option (stages grow while the demo runs them)."""
    try:
        from walkcomfort.model.commands import fit
    except ImportError:
        return False
    return any(name in p.opts for p in fit.params)


def _timelines_in(folder: Path) -> list[Path]:
    return sorted(folder.glob("*/timeline.parquet")) if folder.is_dir() else []


def run_demo(out_dir, demo_dir=None, regenerate: bool = False, seed: int | None = None,
             echo: Callable[[str], None] = print, stages: tuple[str, ...] | None = None) -> DemoRun:
    """Run the chain on the demo scenario and return what ran, what was skipped and where outputs are.

    Parameters
    ----------
    out_dir : path
        Folder for the outputs (one sub-folder per stage).
    demo_dir : path, optional
        The scenario folder (default :func:`default_demo_dir`). Generated there when absent.
    regenerate : bool
        Regenerate the scenario from its seed before running (byte-identical for the same seed).
    seed : int, optional
        Seed for regeneration (default: the scenario's own, or the simulator's default).
    echo : callable
        Where progress lines go.
    stages : tuple of str, optional
        Run only these stages (names as in the CLI verbs); default all.
    """
    from walkcomfort.errors import WalkcomfortError

    out = Path(out_dir)
    demo = Path(demo_dir) if demo_dir is not None else default_demo_dir()
    run = DemoRun(out_dir=out, demo_dir=demo)
    if regenerate or not (demo / "planted.json").is_file():
        from walkcomfort.demo import scenario, simulator

        if seed is None:
            seed = simulator.DEFAULT_SEED
            prov = demo / "provenance.json"
            if prov.is_file():
                import json

                seed = int(json.loads(prov.read_text()).get("seed", seed))
        echo(f"generating the invented scenario into {demo} (seed {seed}) ...")
        scenario.generate_demo(demo, seed=seed)
        run.stages.append(StageResult("generate", "ran", f"seed {seed}", [demo]))
    sessions = demo / "sessions"
    paths = {
        "timelines": out / "timelines",
        "frames": out / "frames",
        "thermal": out / "thermal",
        "model": out / "model",
        "model_planned": out / "model-planned",
        "routes": out / "routes",
        "network": out / "network",
        "map": out / "map",
        "reports": out / "reports",
    }

    def want(name):
        return stages is None or name in stages

    def attempt(name, verb, needs: Callable[[], str], build: Callable[[], list[list[str]]], outputs):
        if not want(name):
            return
        ok, why = _has_verb(verb)
        if not ok:
            run.stages.append(StageResult(name, "failed", why))
            echo(f"[{name}] failed: {why}")
            return
        missing = needs()
        if missing:
            run.stages.append(StageResult(name, "skipped", missing))
            echo(f"[{name}] skipped: {missing}")
            return
        t0 = time.perf_counter()
        try:
            for args in build():
                _run_verb(verb, args, echo)
        except WalkcomfortError as exc:
            run.stages.append(StageResult(name, "failed", exc.one_line()))
            echo(f"[{name}] failed: {exc.one_line()}")
            return
        except ImportError as exc:
            # the stage's command exists but an optional package it needs is not installed
            why = f"needs {getattr(exc, 'name', None) or exc}, which is not installed"
            run.stages.append(StageResult(name, "skipped", why))
            echo(f"[{name}] skipped: {why}")
            return
        except Exception as exc:  # a stage broke: report it, run the rest, exit non-zero at the end
            msg = " ".join(str(exc).split())
            run.stages.append(StageResult(name, "failed", f"internal error {type(exc).__name__}: {msg}"))
            echo(f"[{name}] failed: internal error {type(exc).__name__}: {msg}")
            return
        took = time.perf_counter() - t0
        run.stages.append(StageResult(name, "ran", "", outputs(), took))
        echo(f"[{name}] done in {took:.1f} s -> {', '.join(str(p) for p in outputs())}")

    # 1. ingest every session (QA and quarantine per walk, a campaign table); the manifests state
    #    the air and globe time constants, so the lag of those sensors is corrected
    attempt("ingest", "ingest", lambda: "",
            lambda: [[str(sessions), "-o", str(paths["timelines"]), "--campaign", "--lag-correction"]],
            lambda: [paths["timelines"]])
    have_tl = lambda: "" if _timelines_in(paths["timelines"]) else "no ingested timelines (ingest did not run)"  # noqa: E731

    # 2. camera-frame cues (sky, greenery, people, quality), added to the ingested timelines in place
    attempt("frames", "frames", have_tl,
            lambda: [[str(sessions), "-o", str(paths["timelines"])]],
            lambda: [paths["timelines"]])

    # 3. thermal environment: sun, shade and sky view from the scene, Tmrt from the globe, UTCI
    attempt("thermal", "thermal", have_tl,
            lambda: [[str(paths["timelines"]), "-o", str(paths["thermal"]), "--scene", str(demo / "scene.geojson")]],
            lambda: [paths["thermal"]])
    have_thermal = lambda: "" if _timelines_in(paths["thermal"]) else "no timelines with UTCI (thermal did not run)"  # noqa: E731

    # 4. comfort model, validated on walkers it never saw: one on every feature (for the recorded
    #    walks and the model report) and one on what a planned walk can supply (no sound, light or
    #    camera), which the route and network predictions use
    def fit_args():
        runs = [[str(paths["thermal"]), "-o", str(paths["model"])]]
        if _fit_has_option("--feature-set"):
            runs.append([str(paths["thermal"]), "-o", str(paths["model_planned"]), "--feature-set", "planned"])
        return runs

    attempt("fit", "fit", have_thermal, fit_args,
            lambda: [p for p in (paths["model"], paths["model_planned"]) if p.is_dir()])

    # the walker a planned route is predicted for: summer clothing, acclimatised, the campaign's
    # commonest age band (the invented walkers' own attributes are in their manifests)
    PLANNED_WALKER = "clo=0.5,acclimatised=1,age_band=25-34"

    def route_model():
        for p in (paths["model_planned"], paths["model"]):
            if (p / "manifest.json").is_file():
                return ["--model", str(p)]
        return []

    # 5. planned routes under each shade scheme, on the invented design day
    schemes = [a for p in sorted((demo / "schemes").glob("*.geojson")) for a in ("--scheme", str(p))]

    def compare_args():
        model = route_model()
        from walkcomfort.demo.scenario import DESIGN_DAY
        from walkcomfort.demo.town import TIMEZONE

        return [[str(demo / "routes" / f"{rid}.geojson"), *schemes, "-o", str(paths["routes"] / rid),
                 "--scene", str(demo / "scene.geojson"), "--weather", str(demo / "weather" / "design-day.csv"),
                 "--logger-wind-height", "1.1", "--timezone", TIMEZONE,
                 "--depart", f"{DESIGN_DAY}T{DEPARTURES[0]}..{DESIGN_DAY}T{DEPARTURES[1]}/{DEPARTURES[2]}", *model,
                 "--walker", PLANNED_WALKER]
                for rid in ROUTES]

    attempt("compare", "compare", lambda: "", compare_args, lambda: [paths["routes"] / r for r in ROUTES])

    # 6. the whole street network, a few afternoon hours, base and the schemes (in this process)
    def network_args():
        from walkcomfort.demo.scenario import DESIGN_DAY
        from walkcomfort.demo.town import TIMEZONE

        model = route_model()
        return [[str(demo / "streets.geojson"), "--scene", str(demo / "scene.geojson"), *schemes,
                 "--weather", str(demo / "weather" / "design-day.csv"), "--logger-wind-height", "1.1",
                 "--start", f"{DESIGN_DAY}T{NETWORK_HOURS[0]}", "--end", f"{DESIGN_DAY}T{NETWORK_HOURS[1]}",
                 "--step", NETWORK_HOURS[2], "--timezone", TIMEZONE, *model, "--out", str(paths["network"]),
                 "--overwrite"]]  # the demo's own folder: a re-run replaces its earlier job

    attempt("network", "network", lambda: "", network_args, lambda: [paths["network"]])

    # 7. the HTML map (planned routes per scheme, recorded walks) and the session and model reports
    routes_done = lambda: [paths["routes"] / r for r in ROUTES if (paths["routes"] / r).is_dir()]  # noqa: E731
    walks = paths["thermal"] if _timelines_in(paths["thermal"]) else paths["timelines"]
    attempt("map", "map", lambda: "" if routes_done() or _timelines_in(walks) else "nothing to map yet",
            lambda: [[*[str(p) for p in routes_done()], "--scene", str(demo / "scene.geojson"), *schemes,
                      *(["--walk", str(walks)] if _timelines_in(walks) else []),
                      # the full-feature model's held-out (walker-grouped CV) predictions give the
                      # map its error layer; the network batch gives one street layer per scheme
                      *(["--model", str(paths["model"])] if (paths["model"] / "manifest.json").is_file() else []),
                      *(["--network", str(paths["network"])] if (paths["network"] / "job.json").is_file() else []),
                      # self-contained (Leaflet inlined): opens in the field with no network
                      "--offline",
                      "--timezone", "Europe/Madrid", "-o", str(paths["map"] / "routes.html")]],
            lambda: [paths["map"] / "routes.html"])
    attempt("report", "report", have_tl,
            lambda: [[str(walks), *([str(paths["model"])] if (paths["model"] / "manifest.json").is_file() else []),
                      "-o", str(paths["reports"])]],
            lambda: [paths["reports"]])
    return run


def summary_lines(run: DemoRun) -> list[str]:
    lines = ["", "walkcomfort demo — invented town, invented walks", f"scenario: {run.demo_dir}"]
    for s in run.stages:
        where = f" -> {', '.join(str(p) for p in s.outputs)}" if s.outputs else ""
        why = f" ({s.detail})" if s.detail and s.status != "ran" else ""
        took = f" in {s.seconds:.0f} s" if s.status == "ran" and s.seconds else ""
        lines.append(f"  {s.name:<9} {s.status}{took}{why}{where}")
    lines += ["", CAUTION]
    return lines
