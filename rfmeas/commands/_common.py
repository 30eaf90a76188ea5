"""What every command shares: error reporting, JSON output, consoles."""

from __future__ import annotations

import functools
import logging
import sys
import warnings

import typer

from rfmeas.errors import EXIT_BAD_INPUT, RfmeasError
from rfmeas.io.jsonio import dumps_json  # noqa: F401  (re-exported for commands)
from rfmeas.usertext import plain

DEBUG = {"enabled": False}
"""Set by the root command's --debug: show tracebacks instead of one-line errors."""


def _console_class():
    """rich's Console with a safety net under everything it prints (rfmeas.usertext): control
    characters in the text shown as visible escapes, and text that is not valid markup printed
    as it is.

    Each command escapes the user text it prints; this net catches any that was missed (a
    progress bar's label, a table cell), so a name can never crash a command (MarkupError) or
    drive the terminal (ANSI escapes). rich's own styles and cursor controls are untouched.
    """
    from rich.console import Console
    from rich.errors import MarkupError
    from rich.segment import Segment

    from rfmeas.usertext import visible_lines

    class SafeConsole(Console):
        def render_str(self, text, **kwargs):
            try:
                return super().render_str(text, **kwargs)
            except MarkupError:
                return super().render_str(text, **dict(kwargs, markup=False))

        def _render_buffer(self, buffer):
            return super()._render_buffer(
                segment if segment.control else Segment(visible_lines(segment.text), segment.style)
                for segment in buffer)

    return SafeConsole


def stderr_console():
    return _console_class()(stderr=True, soft_wrap=True, highlight=False)


def stdout_console():
    """The results console: the terminal's width (or COLUMNS), else 120 columns when piped to a file."""
    import os

    columns = os.environ.get("COLUMNS", "")
    wide = sys.stdout.isatty() or (columns.isdigit() and int(columns) > 0)
    return _console_class()(highlight=False, width=None if wide else 120)


DB_HELP = "History store file (default: $RFMEAS_DB, else rfmeas/history.sqlite3 in the user's data folder)."


def db_option():
    """The --db option of every command that reads or keeps history records."""
    return typer.Option(None, "--db", help=DB_HELP, metavar="PATH")


def record_option(what: str = "this analysis"):
    """The --record/--no-record option of the commands that keep analyses in the history."""
    return typer.Option(True, "--record/--no-record", help=f"Keep {what} in the history store (with its raw files).")


def refuse_not_kept(not_kept) -> None:
    """A record the store would not keep: said in one line, then the exit code of its error."""
    report_error(f"{not_kept}; this analysis was not kept in the history (--no-record skips keeping it)")
    raise typer.Exit(not_kept.exit_code)


def report_error(message: str) -> None:
    """One line on stderr: 'error: <file>: <problem>', the message verbatim (never read as markup,
    control characters shown as visible escapes: rfmeas.usertext)."""
    if sys.stderr.isatty():
        from rich.text import Text

        stderr_console().print(Text.assemble(("error:", "bold red"), " " + plain(message)))
    else:
        print(f"error: {plain(message)}", file=sys.stderr)


def log_warning(message, category, filename, lineno, file=None, line=None) -> None:
    """`warnings.showwarning` for the CLI: a library's warning (numpy's RuntimeWarning on an overflow,
    scikit-rf's notices) goes to the log, shown with --debug, never to a user's terminal."""
    logging.getLogger("rfmeas.warnings").debug("%s:%s: %s: %s", filename, lineno, category.__name__, message)


def handles_errors(func):
    """Turn a project error into one stderr line and its exit code; hide tracebacks unless --debug.
    Python warnings raised meanwhile go to the log (`log_warning`)."""

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        try:
            with warnings.catch_warnings():
                warnings.showwarning = log_warning
                return func(*args, **kwargs)
        except RfmeasError as exc:
            if DEBUG["enabled"]:
                raise
            report_error(str(exc))
            raise typer.Exit(exc.exit_code)
        except (typer.Exit, typer.Abort, KeyboardInterrupt):
            raise
        except UnicodeEncodeError as exc:
            if DEBUG["enabled"] or "surrogate" not in str(exc):
                raise
            # A name from the command line or a folder listing holds bytes that are not UTF-8
            # (os.fsdecode keeps them as surrogates), and it reached something that needs text.
            report_error(f"{plain(exc.object)}: this name holds bytes that are not UTF-8 text; "
                         "rename it (or give the path in UTF-8)")
            raise typer.Exit(EXIT_BAD_INPUT)
        except Exception as exc:  # an unforeseen failure: still one line, never a traceback
            if DEBUG["enabled"]:
                raise
            report_error(f"internal error ({type(exc).__name__}: {exc}); rerun with --debug for details")
            raise typer.Exit(EXIT_BAD_INPUT)

    return wrapper


def print_json(data) -> None:
    sys.stdout.write(dumps_json(data) + "\n")


TOUCHSTONE_SUFFIXES = (".s1p", ".s2p")


def resolve_measurement(inputs, turns: str | None = None, termination: str | None = None,
                        port1: str = "primary"):
    """The MeasurementSet behind a command's inputs: one manifest (.toml or its folder), or
    Touchstone files with --turns, --termination (one-port files only) and --port1.

    `analyze` and `report` both take their inputs this way.
    """
    from pathlib import Path

    from rfmeas.errors import InputError
    from rfmeas.measurement.manifest import load_manifest, measurement_set_from_files, parse_turns

    paths = [Path(p) for p in inputs]
    first = paths[0]
    if first.suffix.lower() == ".toml" or first.is_dir():
        if len(paths) > 1:
            raise InputError("give one manifest, or Touchstone files without a manifest", first)
        return load_manifest(first)
    for p in paths:
        if p.suffix.lower() not in TOUCHSTONE_SUFFIXES:
            raise InputError("expected a manifest (.toml, or the folder holding manifest.toml) or "
                             "Touchstone sweeps (.s1p, .s2p)", p)
    if port1 not in ("primary", "secondary"):
        raise InputError(f"--port1 must be primary or secondary, not {port1!r}")
    if termination is not None:
        two_ports = [p for p in paths if p.suffix.lower() == ".s2p"]
        if two_ports:
            raise InputError("--termination applies to one-port (.s1p) sweeps only: a two-port sweep "
                             "measures both windings itself; leave --termination out", two_ports[0])
    return measurement_set_from_files(paths, parse_turns(turns) if turns else None,
                                      termination or "open", port1)


# --- help that reads as written ------------------------------------------------------------
# Placeholders of options in plain words (typer's own read "<bool>", "<list[Path]>").
METAVARS = {
    "--db": "FILE", "--report": "FILE", "--plot": "FILE", "--csv": "FILE", "--spice": "FILE",
    "--touchstone": "FILE", "--output": "FILE", "--materials": "FILE", "--readings": "FILE",
    "--leads-short": "FILE", "--plots": "FOLDER", "--out": "FOLDER", "--profiles-dir": "FOLDER",
    "--turns": "N1:N2", "--plan": "SOURCE:LOAD:LOWEST[:HIGHEST]", "--return-loss": "DB",
    "--termination": "open|short|OHMS", "--sim-termination": "open|short|OHMS",
    "--port1": "primary|secondary", "--sim-port1": "primary|secondary",
    "--start": "HZ", "--stop": "HZ", "--lowest": "HZ", "--highest": "HZ", "--loss-at": "HZ",
    "--sweep": "START:STOP:POINTS", "--source": "OHMS", "--load": "OHMS", "--z0": "OHMS",
    "--dc-resistance": "OHMS", "--lead-resistance": "OHMS", "--lead-inductance": "HENRY",
    "--al": "VALUE", "--al-unit": "UNIT", "--points": "N", "--limit": "N", "--workers": "N",
    "--max-turns": "N", "--retries": "N", "--timeout": "SECONDS", "--reactance-factor": "FACTOR",
    "--toroid": "OD,ID,HEIGHT", "--rod": "DIAMETER,LENGTH", "--name": "NAME", "--unit": "NAME",
    "--resource": "ADDRESS", "--profile": "NAME", "--backend": "BACKEND", "--method": "METHOD",
    "--export": "ID FILE", "--directivity": "DB", "--source-match": "DB", "--tracking": "DB",
}
_TYPE_METAVARS = {"path": "FILE", "int": "N", "float": "NUMBER"}


def _escape_markup(text: str | None) -> str | None:
    """'[design]' kept as written: typer reads help text as rich markup."""
    import re

    return None if text is None else re.sub(r"(?<!\\)\[", r"\\[", text)


def _plain_metavar(param) -> str:
    """A placeholder in plain words for a parameter that declared none."""
    if getattr(param, "is_flag", False):
        return ""  # a flag takes no value
    longest = max(param.opts, key=len) if param.opts else ""
    if longest in METAVARS:
        return METAVARS[longest]
    desc = param.type_descriptor
    if desc.is_choice and desc.choices:
        return "|".join(str(getattr(c, "value", c)) for c in desc.choices)
    if param.param_type_name == "argument":
        return param.name.upper()
    return "FILE" if desc.is_path else _TYPE_METAVARS.get(param.bare_type(), "TEXT")


def _plain_help(command) -> None:
    """Make one command's --help read as written: brackets kept, placeholders in plain words."""
    from typer.core import TyperArgument

    command.help = _escape_markup(command.help)
    command.short_help = _escape_markup(command.short_help)
    for param in command.params:
        if getattr(param, "help", None):
            param.help = _escape_markup(param.help)
        if param.metavar is None:
            metavar = _plain_metavar(param)
            if isinstance(param, TyperArgument) and param.nargs != 1:
                metavar += "..."
            param.metavar = metavar
        if isinstance(param, TyperArgument):
            param.__class__ = _PlainArgument
    from typer import _click

    help_option = command.get_help_option(_click.Context(command, info_name=command.name))
    if help_option is not None:
        help_option.metavar = ""


def _plain_argument_class():
    from typer.core import TyperArgument

    class PlainArgument(TyperArgument):
        """An argument whose help shows its placeholder once, not a Python type beside it."""

        def display_type_rich(self, ctx):
            return None

        def _usage_display_name(self) -> str:
            return self.display_name_raw if self.required else f"[{self.display_name_raw}]"

    return PlainArgument


_PlainArgument = _plain_argument_class()


def _plain_group_class():
    from typer.core import TyperGroup

    class PlainHelpGroup(TyperGroup):
        """The app's group: every command's help text as written, placeholders in plain words."""

        def __init__(self, *args, **kwargs):
            super().__init__(*args, **kwargs)
            _plain_help(self)
            for command in self.commands.values():
                _plain_help(command)

    return PlainHelpGroup


PlainHelpGroup = _plain_group_class()
