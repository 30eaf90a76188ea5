"""A corpus of broken inputs for the "no internal error" guarantee (tests/test_no_internal_error.py).

`build_corpus(folder)` writes every input into `folder` and returns {name: path}. Each one is
something a user or a script can hand rfmeas by mistake: empty, binary, truncated or misnamed
files, special files (FIFO, device, socket-free folder), values out of any range, nesting that
breaks parsers, sweeps listed twice, too many sweeps, missing files. None of them may produce
numbers; every command must refuse each with one clear line.
"""

from __future__ import annotations

import os
import shutil
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_data" / "coupler-after"

GOOD_ROWS = "".join(f"{f:g} 0.{i % 9 + 1} 0.{(i * 7) % 9 + 1}\n" for i, f in enumerate(range(1, 41)))
ONE_PORT = "# MHz S RI R 50\n" + GOOD_ROWS
SWEEP = '[[sweep]]\nfile = "{file}"\ntermination = "open"\n'


def _manifest(folder: Path, name: str, text: str, files: dict[str, str] | None = None) -> Path:
    unit = folder / name
    unit.mkdir()
    for file, content in (files or {}).items():
        (unit / file).write_text(content, encoding="utf-8")
    (unit / "manifest.toml").write_text(text, encoding="utf-8")
    return unit / "manifest.toml"


def _sample_with(folder: Path, name: str, edit) -> Path:
    """A copy of the demo set with its manifest text changed by `edit`."""
    unit = folder / name
    shutil.copytree(SAMPLE, unit)
    manifest = unit / "manifest.toml"
    manifest.write_text(edit(manifest.read_text(encoding="utf-8")), encoding="utf-8")
    return manifest


def build_corpus(folder: Path) -> dict[str, Path]:
    folder = Path(folder)
    corpus: dict[str, Path] = {}

    def put(name: str, content: bytes | str) -> Path:
        path = folder / name
        path.write_bytes(content if isinstance(content, bytes) else content.encode("utf-8"))
        corpus[name] = path
        return path

    # -- Touchstone files
    put("empty.s1p", b"")
    put("blank.s2p", b"  \n\n\t\n")
    put("binary.s1p", bytes(range(256)) * 8)
    put("truncated.s2p", "# MHz S RI R 50\n1 0.1 0.2 0.3 0.4 0.5 0.6 0.7 0.8\n2 0.1 0.2 0.3")
    put("header-only.s1p", "! a comment\n# MHz S RI R 50\n")
    put("prose.s1p", "These are my notes on the winding.\n")
    put("two-points.s1p", "# MHz S RI R 50\n1 0.1 0.2\n2 0.1 0.3\n")
    put("nan.s1p", ONE_PORT + "41 nan 0.1\n")
    put("huge-value.s1p", ONE_PORT + "41 1e300 0.1\n")
    put("huge-frequency.s1p", ONE_PORT.replace("# MHz", "# Hz") + "1e300 0.1 0.2\n")
    put("overflow.s1p", ONE_PORT + "41 0.1 1e999\n")
    put("y-parameters.s1p", ONE_PORT.replace(" S ", " Y "))
    put("sweep.txt", ONE_PORT)                       # a Touchstone file under the wrong extension
    put("sweep.s4p", ONE_PORT)                       # a port count rfmeas does not read
    put("latin1.s1p", "! Messung \xb5H\n".encode("latin-1") + b"\x00\x01" + ONE_PORT.encode())
    sparse = folder / "sparse-100MB.s1p"
    with open(sparse, "wb") as fh:
        fh.truncate(100 * 2**20)                     # no disk space used, yet 100 MB to stat()
    corpus[sparse.name] = sparse

    # -- special files and missing ones
    fifo = folder / "fifo.s1p"
    os.mkfifo(fifo)
    corpus[fifo.name] = fifo
    fifo_toml = folder / "fifo.toml"
    os.mkfifo(fifo_toml)
    corpus[fifo_toml.name] = fifo_toml
    (folder / "folder.s1p").mkdir()
    corpus["folder.s1p"] = folder / "folder.s1p"
    (folder / "no-manifest").mkdir()
    corpus["no-manifest"] = folder / "no-manifest"
    corpus["device"] = Path("/dev/zero")
    corpus["missing.s1p"] = folder / "missing.s1p"
    corpus["missing.toml"] = folder / "missing.toml"
    loop = folder / "loop.s1p"
    os.symlink(loop, loop)
    corpus[loop.name] = loop
    corpus["markup[/]-missing.s1p"] = folder / "b[/]" / "x[bold].s1p"

    # -- TOML manifests
    put("binary.toml", bytes(range(256)))
    put("not-utf8.toml", '[transformer]\nname = "Spule \xb5"\n'.encode("latin-1"))
    put("not-toml.toml", "this is = = not toml [\n")
    put("deep.toml", "a = " + "[" * 1000 + "]" * 1000 + "\n")
    put("deep-inline.toml", "a = " + "{b = " * 1000 + "1" + "}" * 1000 + "\n")
    put("no-sweeps.toml", '[transformer]\nname = "x"\n')
    put("sweep-not-array.toml", "sweep = 3\n")
    put("unknown-key.toml", '[transformer]\nturns = 3\n' + SWEEP.format(file="x.s1p"))
    corpus["names-missing"] = _manifest(folder, "names-missing", SWEEP.format(file="gone.s1p"))
    corpus["names-fifo"] = _manifest(folder, "names-fifo", SWEEP.format(file="../fifo.s1p"))
    corpus["names-folder"] = _manifest(folder, "names-folder", SWEEP.format(file="."))
    corpus["names-itself"] = _manifest(folder, "names-itself", SWEEP.format(file="manifest.toml"))
    corpus["too-many-sweeps"] = _manifest(folder, "too-many-sweeps",
                                          "".join(SWEEP.format(file=f"s{i}.s1p") for i in range(10_000)))
    corpus["duplicate-sweeps"] = _sample_with(
        folder, "duplicate-sweeps", lambda t: t + "\n" + SWEEP.format(file="pri_open.s1p") * 3)
    corpus["design-tiny"] = _sample_with(
        folder, "design-tiny", lambda t: t.replace("source_impedance_ohm = 50", "source_impedance_ohm = 1e-300"))
    corpus["design-huge"] = _sample_with(
        folder, "design-huge", lambda t: t.replace("load_impedance_ohm = 450", "load_impedance_ohm = 1e300"))
    corpus["turns-huge"] = _sample_with(
        folder, "turns-huge", lambda t: t.replace("primary_turns = 5", "primary_turns = 1e300"))
    corpus["name-escape"] = _sample_with(
        folder, "name-escape", lambda t: t.replace('name = "ladder-line coupler, unit 3"',
                                                   'name = "unit\\u001b]0;owned\\u0007"'))
    corpus["dead-short"] = _manifest(
        folder, "dead-short", SWEEP.format(file="a.s1p") + SWEEP.format(file="b.s1p").replace(
            'termination', 'port1 = "secondary"\ntermination'),
        {"a.s1p": "# MHz S RI R 50\n" + "".join(f"{f} -1 0\n" for f in range(1, 31)),
         "b.s1p": "# MHz S RI R 50\n" + "".join(f"{f} -1 0.0 \n" for f in range(1, 31)) + "31 -1 0\n"})
    return corpus
