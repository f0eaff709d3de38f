"""The shell and Python examples of README.md, docs/guide.md and docs/cli.md, run in order in
one clean folder, as a reader following them would.

Conventions of the documents (kept here and nowhere else):

- A ```` ```console ```` block is run line by line: its lines starting with ``$ `` are the
  commands (the rest is output shown to the reader); a block without such lines is all
  commands.  A ```` ```python ```` block is run as one script.  Other blocks (``text``) are
  output or formulas and are not run.
- An HTML comment on the line just above a block changes that: ``<!-- example: skip (why) -->``
  leaves it out (installation, the test suite itself, the benchmark), ``<!-- example: fails -->``
  expects every command to fail as a user error (exit status 2, one line on stderr).

The folder holds only ``data_demo`` (a link to the repository's), and commands reach this
checkout's sphex as ``sphex`` and as ``.venv/bin/sphex``, as the documents say to run them.
"""
from __future__ import annotations

import os
import re
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

import pytest

pytestmark = pytest.mark.slow

ROOT = Path(__file__).resolve().parent.parent
DOCUMENTS = ("README.md", "docs/guide.md", "docs/cli.md")
_FENCE = re.compile(r"^```(\w*)[^\n]*\n(.*?)^```[ \t]*$", re.S | re.M)
_MARK = re.compile(r"<!--\s*example:\s*(skip|fails)\b")


@dataclass(frozen=True)
class Example:
    document: str
    line: int
    language: str
    body: str
    mark: str | None

    @property
    def name(self) -> str:
        return f"{self.document}:{self.line}"

    def commands(self) -> list[str]:
        lines = [ln.rstrip() for ln in self.body.splitlines()]
        dollar = [ln[2:] for ln in lines if ln.startswith("$ ")]
        if dollar:
            return dollar
        return [ln for ln in lines if ln.strip() and not ln.lstrip().startswith("#")]


def examples_of(document: str) -> list[Example]:
    text = (ROOT / document).read_text(encoding="utf-8")
    found = []
    for m in _FENCE.finditer(text):
        language = m.group(1)
        if language not in ("console", "python"):
            continue
        above = text[: m.start()].rstrip("\n").splitlines()
        mark = _MARK.search(above[-1]) if above else None
        found.append(Example(document, text.count("\n", 0, m.start()) + 1, language, m.group(2),
                             mark.group(1) if mark else None))
    return found


EXAMPLES = [e for d in DOCUMENTS for e in examples_of(d)]
RUN = [e for e in EXAMPLES if e.mark != "skip"]


def test_the_documents_hold_the_examples_they_should():
    by_doc = {d: [e for e in RUN if e.document == d] for d in DOCUMENTS}
    assert all(by_doc.values()), {d: len(v) for d, v in by_doc.items()}
    assert any(e.language == "python" for e in RUN)
    # every shell command is a sphex command (no prose caught in a block by mistake)
    for e in RUN:
        if e.language == "console":
            for c in e.commands():
                assert re.match(r"(\.venv/bin/)?sphex ", c), (e.name, c)
    # the skipped ones are installation, the test suite and the benchmark only
    for e in EXAMPLES:
        if e.mark == "skip":
            assert re.search(r"pip install|pytest|sphex bench", e.body), e.name


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    """A clean folder with the demo data and this checkout's sphex on the path."""
    d = tmp_path_factory.mktemp("examples")
    (d / "data_demo").symlink_to(ROOT / "data_demo", target_is_directory=True)
    bin_dir = d / ".venv" / "bin"
    bin_dir.mkdir(parents=True)
    for name, line in (("sphex", f'exec "{sys.executable}" -m sphex.cli "$@"'),
                       ("python", f'exec "{sys.executable}" "$@"')):
        shim = bin_dir / name
        shim.write_text(f"#!/bin/sh\n{line}\n")
        shim.chmod(0o755)
    env = dict(os.environ, PYTHONPATH=str(ROOT), MPLBACKEND="Agg", PYTHONWARNINGS="ignore",
               PATH=f"{bin_dir}{os.pathsep}{os.environ.get('PATH', '')}")
    env.pop("SPHEX_DEBUG", None)
    return d, env


@pytest.mark.parametrize("example", RUN, ids=[e.name for e in RUN])
def test_example_runs(example, folder):
    d, env = folder
    if example.language == "python":
        script = d / f"example_{Path(example.document).stem}_{example.line}.py"
        script.write_text(example.body)
        r = subprocess.run([sys.executable, script.name], cwd=d, env=env, capture_output=True,
                           text=True, timeout=600)
        assert r.returncode == 0, f"{example.name}\n{r.stderr}"
        return
    for command in example.commands():
        r = subprocess.run(["bash", "-c", command], cwd=d, env=env, capture_output=True, text=True,
                           timeout=600)
        if example.mark == "fails":
            lines = r.stderr.strip().splitlines()
            assert r.returncode == 2 and len(lines) == 1 and "error:" in lines[0], \
                f"{example.name}: {command}\n{r.stderr}"
        else:
            assert r.returncode == 0, f"{example.name}: {command}\n{r.stdout}\n{r.stderr}"
