"""``walkcomfort demo``: run the whole chain on the invented demo town."""

from __future__ import annotations

from pathlib import Path

import click


@click.command(help="Run the whole chain on the invented demo town (demo_walks/): ingest, frame cues, "
                    "thermal environment, model fit, route comparison under shade schemes, the street network, "
                    "map and reports, "
                    "as far as those stages exist. The data are invented; the outputs are not design advice.")
@click.option("-o", "--out", "out_dir", type=click.Path(file_okay=False, path_type=Path),
              default=Path("walkcomfort-out"), show_default=True, help="Output folder (one sub-folder per stage).")
@click.option("--demo-dir", type=click.Path(file_okay=False, path_type=Path), default=None,
              help="The scenario folder (default: demo_walks/ of this clone).")
@click.option("--regenerate", is_flag=True,
              help="Regenerate the scenario from its seed first (byte-identical for the same seed).")
@click.option("--seed", type=int, default=None, help="Seed for --regenerate (default: the scenario's own).")
@click.option("--only", "only", multiple=True,
              type=click.Choice(["ingest", "frames", "thermal", "fit", "compare", "network", "map", "report"]),
              help="Run only this stage (repeatable).")
def demo(out_dir, demo_dir, regenerate, seed, only):
    from walkcomfort.demo.pipeline import CAUTION, run_demo, summary_lines
    from walkcomfort.errors import WalkcomfortError

    click.echo(CAUTION)
    run = run_demo(out_dir, demo_dir=demo_dir, regenerate=regenerate, seed=seed, echo=click.echo,
                   stages=tuple(only) or None)
    for line in summary_lines(run):
        click.echo(line)
    if not run.ok:
        failed = [s.name for s in run.stages if s.status == "failed"]
        raise WalkcomfortError(f"stage(s) failed: {', '.join(failed)}", fix="see the lines above")
