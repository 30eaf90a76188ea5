"""CLI commands, one module each; every module exposes `register(app)`.

Modules import only typer and the standard library at the top; heavy imports
(numpy, scipy, scikit-rf, matplotlib) happen inside the command functions so
`rfmeas --help` stays fast.
"""

# Order here is the order `rfmeas --help` lists them in.
COMMAND_MODULES = [
    "analyze",
    "report",
    "plan",
    "core",
    "compare",
    "history",
    "batch",
    "export",
    "acquire",
    "demo",
]
