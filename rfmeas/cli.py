"""Command-line entry point: a thin typer app; commands live in rfmeas.commands."""

from __future__ import annotations

import importlib

import typer

from rfmeas.commands import COMMAND_MODULES
from rfmeas.commands._common import DEBUG, PlainHelpGroup

app = typer.Typer(
    name="rfmeas",
    help="Characterise hand-wound small-signal transformers from VNA and LCR measurements.",
    no_args_is_help=True,
    pretty_exceptions_enable=False,
    add_completion=False,
    cls=PlainHelpGroup,
)

def _version_callback(value: bool):
    if value:
        from rfmeas import __version__

        typer.echo(f"rfmeas {__version__}")
        raise typer.Exit(0)


@app.callback()
def _root(
    debug: bool = typer.Option(False, "--debug", help="Show full tracebacks on errors."),
    version: bool = typer.Option(False, "--version", callback=_version_callback, is_eager=True,
                                 help="Print the version and exit."),
):
    DEBUG["enabled"] = debug
    if debug:
        _debug_logging()


def _debug_logging() -> None:
    """With --debug, rfmeas's log (and the library warnings routed into it) goes to stderr."""
    import logging

    logger = logging.getLogger("rfmeas")
    if not any(getattr(h, "rfmeas_debug", False) for h in logger.handlers):
        handler = logging.StreamHandler()
        handler.setFormatter(logging.Formatter("%(levelname)s %(name)s: %(message)s"))
        handler.rfmeas_debug = True
        logger.addHandler(handler)
    logger.setLevel(logging.DEBUG)


for _name in COMMAND_MODULES:
    importlib.import_module(f"rfmeas.commands.{_name}").register(app)


def main() -> None:
    """Console-script entry point.

    The fits multiply small matrices (thousands × 9), where BLAS threads cost
    more than they give, so one thread is the default unless the user set one.
    numpy is imported lazily by the commands, so this still takes effect.
    """
    import os

    for name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
        os.environ.setdefault(name, "1")
    app()  # each command sends library warnings to the log (commands._common.handles_errors)


if __name__ == "__main__":
    main()
