"""Every code example in README.md and docs/*.md runs.

Each Markdown file is one test. Its fenced blocks run in order in one
namespace per file, in a fresh temporary working directory, with the Agg
matplotlib backend:

- ```python blocks are executed;
- ```bash blocks whose commands start with ``skbayeslogit`` are run through
  :func:`skbayeslogit.cli.main` with shlex-split arguments and must exit 0
  (other bash blocks, such as pip commands, are not run);
- a ```text block preceded by the line ``<!-- output -->`` must equal, up to
  trailing whitespace, what the block just before it printed;
- the line ``<!-- no-test -->`` just before a fence skips that block;
- the line ``<!-- requires: MODULE -->`` runs the block only when MODULE
  (an optional extra, such as dask) is importable, else skips it and the
  output block after it.

The index page must link every page, and relative links must resolve.
"""

import contextlib
import importlib.util
import io
import re
import shlex
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
DOCS = ROOT / "docs"
PAGES = [ROOT / "README.md", *sorted(DOCS.glob("*.md"))]

_FENCE = re.compile(r"^```(\w*)\s*$")


def _blocks(path):
    """(language, code, marker, line number) for each fenced block of a file."""
    lines = path.read_text(encoding="utf-8").splitlines()
    out = []
    i = 0
    while i < len(lines):
        match = _FENCE.match(lines[i])
        if not match:
            i += 1
            continue
        lang, start = match.group(1), i + 1
        j = start
        while j < len(lines) and lines[j].strip() != "```":
            j += 1
        prev = next((lines[k].strip() for k in range(i - 1, -1, -1) if lines[k].strip()), "")
        marker = prev if prev in ("<!-- no-test -->", "<!-- output -->") else None
        if prev.startswith("<!-- requires: ") and prev.endswith(" -->"):
            marker = prev
        out.append((lang, "\n".join(lines[start:j]) + "\n", marker, start))
        i = j + 1
    return out


def _commands(code):
    """The shell commands of a bash block, continuation lines joined."""
    joined = code.replace("\\\n", " ")
    return [c.strip() for c in joined.splitlines() if c.strip() and not c.strip().startswith("#")]


def _run_cli(command):
    from skbayeslogit.cli import main

    args = shlex.split(command)
    assert args[0] == "skbayeslogit"
    return main(args[1:])


@pytest.mark.parametrize("page", PAGES, ids=[p.name for p in PAGES])
def test_examples_run(page, tmp_path, monkeypatch):
    monkeypatch.setenv("MPLBACKEND", "Agg")
    monkeypatch.chdir(tmp_path)
    try:
        import matplotlib

        matplotlib.use("Agg", force=True)
    except ImportError:  # pragma: no cover - matplotlib is a test dependency
        pass
    namespace = {"__name__": f"docs_{page.stem}"}
    last_output = None
    skip_output = False
    for lang, code, marker, line in _blocks(page):
        where = f"{page.name}, block at line {line}"
        if marker == "<!-- no-test -->":
            continue
        if marker is not None and marker.startswith("<!-- requires: "):
            # An optional extra: without it the block and its output are skipped.
            module = marker[len("<!-- requires: ") : -len(" -->")]
            if importlib.util.find_spec(module) is None:
                skip_output = True
                continue
        if lang == "text" and marker == "<!-- output -->" and skip_output:
            skip_output = False
            continue
        skip_output = False
        if lang == "python":
            buffer = io.StringIO()
            with contextlib.redirect_stdout(buffer):
                exec(compile(code, f"{page.name}:{line}", "exec"), namespace)  # noqa: S102
            last_output = buffer.getvalue()
        elif lang == "bash":
            commands = _commands(code)
            if not commands or not commands[0].startswith("skbayeslogit"):
                continue
            buffer = io.StringIO()
            with contextlib.redirect_stdout(buffer):
                for command in commands:
                    assert command.startswith("skbayeslogit"), f"{where}: {command!r}"
                    assert _run_cli(command) == 0, f"{where}: {command!r} failed"
            last_output = buffer.getvalue()
        elif lang == "text" and marker == "<!-- output -->":
            assert last_output is not None, f"{where}: output block without code before it"
            got = [s.rstrip() for s in last_output.strip("\n").splitlines()]
            want = [s.rstrip() for s in code.strip("\n").splitlines()]
            assert got == want, f"{where}: printed output differs:\n" + "\n".join(got)
    try:
        import matplotlib.pyplot as plt

        plt.close("all")
    except ImportError:  # pragma: no cover
        pass


def test_index_links_every_page_and_links_resolve():
    index = (DOCS / "index.md").read_text(encoding="utf-8")
    for page in DOCS.glob("*.md"):
        if page.name != "index.md":
            assert f"({page.name}" in index, f"index.md does not link {page.name}"
    link = re.compile(r"\]\(([^)#\s]+)(#[^)]*)?\)")
    for page in PAGES:
        for target, _ in link.findall(page.read_text(encoding="utf-8")):
            if "://" in target or target.startswith("mailto:"):
                continue
            resolved = (page.parent / target).resolve()
            assert resolved.exists(), f"{page.name}: broken link {target}"


def test_block_parser_sees_markers(tmp_path):
    page = tmp_path / "p.md"
    page.write_text(
        "text\n\n<!-- no-test -->\n```bash\npip install x\n```\n\n```python\nprint(1)\n```\n"
        "<!-- output -->\n```text\n1\n```\n",
        encoding="utf-8",
    )
    blocks = _blocks(page)
    assert [(b[0], b[2]) for b in blocks] == [
        ("bash", "<!-- no-test -->"),
        ("python", None),
        ("text", "<!-- output -->"),
    ]
    commands = _commands("skbayeslogit report \\\n  --cv 3\n# note\n")
    assert commands == ["skbayeslogit report    --cv 3"]
