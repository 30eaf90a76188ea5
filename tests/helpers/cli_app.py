"""The typer app for CLI tests of the store, compare and batch commands.

The full app (rfmeas.cli) registers every command; on a branch where some
command modules are not written yet it cannot be imported, and then these
tests build an app with just the commands under test. handles_errors reads
rfmeas.cli.DEBUG, so that fallback also provides a module holding it.
"""

import functools
import importlib
import sys
import types

import typer


@functools.cache
def cli_app() -> typer.Typer:
    try:
        from rfmeas.cli import app
    except ModuleNotFoundError as exc:
        if not (exc.name or "").startswith("rfmeas.commands."):
            raise
        sys.modules.pop("rfmeas.cli", None)
        sys.modules.setdefault("rfmeas.cli", types.SimpleNamespace(DEBUG={"enabled": False}))
        app = typer.Typer(pretty_exceptions_enable=False, add_completion=False)
        for name in ("history", "compare", "batch"):
            importlib.import_module(f"rfmeas.commands.{name}").register(app)
    return app
