"""Every command's --help reads as written (issue 16, "Words"): no typer placeholders such as
<bool>, <list[Path]> or {inputs}, and bracketed section names like [design] are kept."""

import re

import pytest
from typer.testing import CliRunner

from rfmeas.cli import app
from rfmeas.commands import COMMAND_MODULES


def _commands() -> list[str]:
    import typer.main

    return sorted(typer.main.get_command(app).commands)


def _help(args: list[str]) -> str:
    res = CliRunner().invoke(app, [*args, "--help"], env={"COLUMNS": "200", "TERM": "dumb"})
    assert res.exit_code == 0, res.output
    return res.output


def test_every_command_module_has_a_command():
    assert len(_commands()) >= len(COMMAND_MODULES)


@pytest.mark.parametrize("command", [[]] + [[c] for c in [
    "analyze", "report", "plan", "core", "compare", "history", "batch", "export", "acquire", "acquire-set",
    "demo"]])
def test_help_has_no_type_placeholders(command):
    assert set(c[0] for c in [command] if c) <= set(_commands())
    text = _help(command)
    for placeholder in ("<bool>", "<str>", "<int>", "<float>", "<path>", "list[", "<Path>"):
        assert placeholder not in text, (command, placeholder)
    assert not re.search(r"\{[A-Za-z_]+\}", text), text  # typer's {inputs} for a required argument


def test_bracketed_section_names_are_kept():
    import typer.main

    group = typer.main.get_command(app)
    for name, command in group.commands.items():
        written = " ".join(filter(None, [command.help] + [getattr(p, "help", None) for p in command.params]))
        mentioned = set(re.findall(r"\\?\[(design|core|transformer|sweeps?|[a-z_]+)\]", written))
        text = _help([name])
        for section in mentioned:
            assert f"[{section}]" in text, (name, section)


def test_analyze_help_names_the_design_table():
    # the example: "instead of the manifest's [design]" lost its [design]
    assert "[design]" in _help(["analyze"])


SAMPLE = __import__("pathlib").Path(__file__).resolve().parents[1] / "sample_data" / "coupler-after"


def test_export_takes_one_sweep_option_and_keeps_the_old_spelling(tmp_path):
    from rfmeas.io.touchstone import read_touchstone

    new, old = tmp_path / "new.s2p", tmp_path / "old.s2p"
    runner = CliRunner()
    res = runner.invoke(app, ["export", str(SAMPLE), "--touchstone", str(new), "--sweep", "100k:10M:21"])
    assert res.exit_code == 0, res.output
    res = runner.invoke(app, ["export", str(SAMPLE), "--touchstone", str(old), "--start", "100k", "--stop", "10M",
                              "--points", "21"])
    assert res.exit_code == 0, res.output
    a, b = read_touchstone(new).network, read_touchstone(old).network
    assert a.f.size == b.f.size == 21 and a.f[0] == pytest.approx(1e5) and a.f[-1] == pytest.approx(1e7)
    assert (a.s == b.s).all()
    both = runner.invoke(app, ["export", str(SAMPLE), "--touchstone", str(new), "--sweep", "100k:10M:21",
                               "--points", "5"])
    assert both.exit_code == 2
    assert "--start" not in _help(["export"]) and "--sweep" in _help(["export"])  # the old name is hidden


def test_history_export_overwrite_and_its_old_spelling():
    text = _help(["history"])
    assert "--overwrite" in text and "--force" not in text
