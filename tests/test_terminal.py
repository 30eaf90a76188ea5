"""The terminal tables show text as written: no rich markup is read from names, notes or warnings."""

import dataclasses
from pathlib import Path

from rich.console import Console

from rfmeas.analysis import analyze_manifest
from rfmeas.present.terminal import render_analysis

SAMPLE = Path(__file__).resolve().parents[1] / "sample_data" / "coupler-after"


def test_brackets_in_user_text_are_printed_verbatim():
    analysis = analyze_manifest(SAMPLE)
    measurement = dataclasses.replace(analysis.measurement, name="unit [bold]7[/]", notes="see [design]")
    analysis = dataclasses.replace(analysis, measurement=measurement,
                                   warnings=("give a [design] table",))
    console = Console(width=160, record=True)
    render_analysis(analysis, console)
    text = console.export_text()
    for fragment in ("unit [bold]7[/]", "see [design]", "give a [design] table"):
        assert fragment in text
