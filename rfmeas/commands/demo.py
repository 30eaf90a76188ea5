"""`rfmeas demo`: the main job on the bundled, invented sample measurements."""

from __future__ import annotations

from pathlib import Path

import typer

from rfmeas.commands._common import handles_errors, stdout_console
from rfmeas.usertext import markup


def register(app: typer.Typer) -> None:
    app.command("demo")(demo_command)


def sample_data_root() -> Path:
    """The bundled sample sets: installed as rfmeas.sample_data, or sample_data/ in a checkout."""
    import importlib.util

    try:
        spec = importlib.util.find_spec("rfmeas.sample_data")
    except ModuleNotFoundError:
        spec = None
    for location in (spec.submodule_search_locations or []) if spec else []:
        if (Path(location) / "README.md").is_file():
            return Path(location)
    return Path(__file__).resolve().parents[2] / "sample_data"


DEMO_ORDER = ("coupler-before", "coupler-after")
"""The story the demo tells: the unit as first wound, then after the rework."""
CORE_SETS = ("unknown-core",)
"""Sample sets of a single test winding, for the core analysis rather than the transformer fit."""


def sample_manifests() -> list[Path]:
    """The transformer sample sets, before-then-after first, any others after them by name."""
    found = [p for p in sorted(sample_data_root().glob("*/manifest.toml")) if p.parent.name not in CORE_SETS]
    rank = {name: i for i, name in enumerate(DEMO_ORDER)}
    return sorted(found, key=lambda p: (rank.get(p.parent.name, len(rank)), p.parent.name))


@handles_errors
def demo_command(
    out: Path = typer.Option(Path("."), "--out", help="Folder for the demo's outputs (default: the current folder)."),
):
    """Analyse the bundled sample measurements and write the results into --out."""
    from rfmeas.analysis import analyze_manifest
    from rfmeas.errors import InputError
    from rfmeas.io.atomic import atomic_write_text
    from rfmeas.present.terminal import render_analysis
    from rfmeas.commands._common import dumps_json
    from rfmeas.commands.report import write_outputs

    manifests = sample_manifests()
    if not manifests:
        raise InputError("the bundled sample data are missing from this installation", sample_data_root())
    out.mkdir(parents=True, exist_ok=True)
    console = stdout_console()
    console.print("[dim]Sample data: invented measurements of a 50 Ω → 450 Ω ladder-line coupler, "
                  "as first wound and after a rewind (see sample_data/README.md).[/]")
    written, reports, analyses = [], [], {}
    for manifest in manifests:
        analysis = analyze_manifest(manifest)
        analyses[manifest.parent.name] = analysis
        console.rule(manifest.parent.name)
        render_analysis(analysis, console)
        target = out / f"{manifest.parent.name}.json"
        atomic_write_text(target, dumps_json(analysis.to_dict()) + "\n")
        written.append(target)
        reports.append(Path(write_outputs(analysis, out / f"{manifest.parent.name}.html")["report"]))
    if all(name in analyses for name in DEMO_ORDER):
        written.append(_compare(analyses[DEMO_ORDER[0]], analyses[DEMO_ORDER[1]], out, console))
    for name in CORE_SETS:
        if (sample_data_root() / name / "manifest.toml").is_file():
            written.extend(_core(sample_data_root() / name, out, console))
    console.rule()
    for path in written:
        console.print(f"wrote {markup(path)}")
    for path in reports:
        console.print(f"[bold]report:[/] {markup(path)}  (open it in a web browser)")


def _compare(before, after, out: Path, console) -> Path:
    """The rework in a few lines, and the overlay of both units' sweeps and models."""
    from rfmeas.history.compare import compare_results
    from rfmeas.present.plots.compare import plot_comparison

    comparison = compare_results(before.to_dict(), after.to_dict())
    console.rule("before → after")
    for line in comparison.verdict:
        console.print(f"  • {line}")
    target = out / "compare.png"
    plot_comparison(before, after, target)
    return target


def _core(folder: Path, out: Path, console) -> list[Path]:
    """The unknown-core job: what is this core? (see `rfmeas core`)."""
    from rfmeas.fit.core_spectrum import analyze_core_file
    from rfmeas.io.atomic import atomic_write_text
    from rfmeas.present.plots.permeability import plot_permeability
    from rfmeas.commands._common import dumps_json
    from rfmeas.commands.core import render_core

    console.rule(f"{folder.name}: what is this core?")
    analysis = analyze_core_file(folder)
    render_core(analysis, console)
    json_path, plot_path = out / f"{folder.name}.json", out / f"{folder.name}.png"
    atomic_write_text(json_path, dumps_json(analysis.to_dict()) + "\n")
    plot_permeability(analysis, plot_path)
    return [json_path, plot_path]
