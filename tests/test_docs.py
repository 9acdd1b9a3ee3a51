"""The documentation does what it says.

* Every command shown in a ```` ```console ```` or ```` ```sh ```` block of a page in
  ``docs/`` is run, in order, in a temporary folder holding a copy of
  ``demo_images/`` and ``docs/examples/``: ``fringemap ...`` lines through
  :func:`fringemap.cli.main`, ``python docs/examples/...`` lines as a subprocess.
  Each must exit 0 unless the block is preceded by ``<!-- docs-test: exit N -->``;
  ``<!-- docs-test: skip -->`` leaves a block out (commands that need another
  machine, such as a cluster's scheduler).
* The output a page shows after a ``$`` command (the lines up to the next ``$``)
  must appear in what the command printed, numbers within 2 % (``...`` in a
  shown line stands for text that differs between runs, such as the folder):
  the numbers in the guides are quoted from real runs and must stay true.
* Every example script in ``docs/examples/`` runs and writes its figures.
* The generated reference pages are current (``python -m fringemap.cli.docgen --check``).
* Relative links between the pages and to the figures resolve; README links every page.
"""

from __future__ import annotations

import contextlib
import io
import math
import os
import re
import shlex
import shutil
import subprocess
import sys
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
DOCS = ROOT / "docs"
EXAMPLES = DOCS / "examples"

_FENCE = re.compile(r"^```(\w*)\s*$")
_MARK = re.compile(r"<!--\s*docs-test:\s*(skip|exit\s+(\d+))\s*-->")
_NUMBER = re.compile(r"[-+]?\d+(?:\.\d+)?(?:e[-+]?\d+)?")
# run-to-run quantities (wall-clock time, speed): not compared
_VOLATILE = [
    re.compile(r"\d+(?:\.\d+)? s with"),
    re.compile(r"\d+(?:\.\d+)? photos/min"),
    re.compile(r"in \d+(?:\.\d+)? s\b"),
]


@dataclass
class Command:
    line: str
    page: str
    lineno: int
    expect_exit: int = 0
    output: list[str] = field(default_factory=list)


def page_commands(path: Path) -> list[Command]:
    """The runnable commands of a page, with the output it shows for each."""
    commands: list[Command] = []
    lines = path.read_text(encoding="utf-8").splitlines()
    i, mark = 0, None
    while i < len(lines):
        text = lines[i]
        m = _MARK.search(text)
        if m:
            mark = m
        fence = _FENCE.match(text)
        if not fence:
            if text.strip() and not m:
                mark = None
            i += 1
            continue
        lang = fence.group(1)
        j = i + 1
        while j < len(lines) and not lines[j].startswith("```"):
            j += 1
        body, start = lines[i + 1 : j], i + 2
        i = j + 1
        if lang not in ("console", "sh"):
            mark = None
            continue
        if mark is not None and mark.group(1) == "skip":
            mark = None
            continue
        code = int(mark.group(2)) if mark is not None and mark.group(2) else 0
        mark = None
        k = 0
        current = None
        while k < len(body):
            raw = body[k]
            lineno = start + k
            stripped = raw.strip()
            is_prompt = stripped.startswith("$ ")
            if is_prompt or (lang == "sh" and stripped and not stripped.startswith("#")):
                cmd = stripped[2:] if is_prompt else stripped
                while cmd.endswith("\\") and k + 1 < len(body):
                    k += 1
                    cmd = cmd[:-1].rstrip() + " " + body[k].strip()
                current = None
                if cmd.startswith(("fringemap ", "python docs/examples/")):
                    current = Command(cmd, path.name, lineno, expect_exit=code)
                    commands.append(current)
            elif current is not None and stripped and lang == "console":
                current.output.append(stripped)
            k += 1
    return commands


def _calm(text: str) -> str:
    for pat in _VOLATILE:
        text = pat.sub("~", text)
    return text


def _pattern(expected: str) -> tuple[re.Pattern, list[float]]:
    """A regex for a line the page shows (numbers captured, ``...`` matches anything)."""
    parts, numbers = [], []
    for i, piece in enumerate(_calm(expected).split("...")):
        if i:
            parts.append(".*?")
        pos = 0
        for m in _NUMBER.finditer(piece):
            parts.append(re.escape(piece[pos : m.start()]))
            parts.append(f"({_NUMBER.pattern})")
            numbers.append(float(m.group()))
            pos = m.end()
        parts.append(re.escape(piece[pos:]))
    return re.compile("".join(parts)), numbers


def _close(a: float, b: float) -> bool:
    return math.isclose(a, b, rel_tol=0.02, abs_tol=0.06)


def output_matches(expected: str, printed: list[str]) -> bool:
    """True if a printed line reads as the expected line, its numbers within 2 %."""
    pattern, want = _pattern(expected)
    for line in printed:
        m = pattern.fullmatch(_calm(line))
        if m and all(_close(float(g), w) for g, w in zip(m.groups(), want, strict=True)):
            return True
    return False


def run_command(cmd: Command, cwd: Path) -> tuple[int, str]:
    """Run one documented command in ``cwd``; returns (exit code, all it printed)."""
    argv = shlex.split(cmd.line)
    if argv[0] == "python":
        proc = subprocess.run(
            [sys.executable, *argv[1:]],
            cwd=cwd,
            capture_output=True,
            text=True,
            timeout=300,
            env={**os.environ, "MPLBACKEND": "Agg"},
        )
        return proc.returncode, proc.stdout + proc.stderr
    from fringemap import cli

    cli.SHOWN_WARNINGS.clear()
    out, err = io.StringIO(), io.StringIO()
    old = Path.cwd()
    os.chdir(cwd)
    try:
        with (
            warnings.catch_warnings(),
            contextlib.redirect_stdout(out),
            contextlib.redirect_stderr(err),
        ):
            warnings.simplefilter("default")
            try:
                code = cli.main(argv[1:])
            except SystemExit as exc:  # argparse
                code = exc.code if isinstance(exc.code, int) else 2
    finally:
        os.chdir(old)
    return code, out.getvalue() + err.getvalue()


def _workdir(tmp_path: Path) -> Path:
    shutil.copytree(ROOT / "demo_images", tmp_path / "demo_images")
    shutil.copytree(
        EXAMPLES, tmp_path / "docs" / "examples", ignore=shutil.ignore_patterns("__pycache__")
    )
    return tmp_path


# docs/errors.md is checked by tests/test_bad_inputs.py, with the failures it shows
PAGES = sorted(p for p in DOCS.glob("*.md") if p.name != "errors.md" and page_commands(p))


def test_the_guides_have_commands():
    names = {p.name for p in PAGES}
    for guide in (
        "getting-started.md",
        "guide-wafer.md",
        "guide-coating.md",
        "guide-soap-film.md",
        "guide-thick-films.md",
        "guide-batch.md",
    ):
        assert guide in names, guide


@pytest.mark.parametrize("page", PAGES, ids=[p.stem for p in PAGES])
def test_page_commands_run_and_print_what_the_page_shows(page, tmp_path):
    cwd = _workdir(tmp_path)
    for cmd in page_commands(page):
        code, printed = run_command(cmd, cwd)
        where = f"{cmd.page}:{cmd.lineno}: {cmd.line}"
        assert code == cmd.expect_exit, (
            f"{where}\nexit {code}, expected {cmd.expect_exit}\n{printed}"
        )
        lines = [ln.strip() for ln in re.split(r"[\r\n]+", printed) if ln.strip()]
        for expected in cmd.output:
            assert output_matches(expected, lines), (
                f"{where}\nthe page shows:\n  {expected}\nbut the command printed:\n"
                + "\n".join(f"  {ln}" for ln in lines)
            )


EXAMPLE_SCRIPTS = sorted(p for p in EXAMPLES.glob("*.py") if not p.name.startswith("_"))


@pytest.mark.parametrize("script", EXAMPLE_SCRIPTS, ids=[p.stem for p in EXAMPLE_SCRIPTS])
def test_example_script_runs(script, tmp_path):
    out = tmp_path / "out"
    proc = subprocess.run(
        [sys.executable, str(script), str(out)],
        cwd=tmp_path,
        capture_output=True,
        text=True,
        timeout=300,
        env={**os.environ, "MPLBACKEND": "Agg"},
    )
    assert proc.returncode == 0, proc.stdout + proc.stderr
    written = [p for p in out.rglob("*") if p.is_file()]
    assert written, f"{script.name} wrote nothing"
    shown = {
        n
        for page in DOCS.glob("*.md")
        for n in re.findall(r"images/([\w-]+\.png)", page.read_text(encoding="utf-8"))
    }
    for png in out.glob("*.png"):
        if png.name in shown:
            assert png.stat().st_size < 250_000, f"{png.name} is large for a doc figure"


def test_figures_in_the_pages_are_made_by_an_example():
    # every docs/images/*.png a page shows is one an example script writes
    made = set()
    for script in EXAMPLE_SCRIPTS:
        made |= set(re.findall(r"[\w-]+\.png", script.read_text(encoding="utf-8")))
    for page in DOCS.glob("*.md"):
        for name in re.findall(r"\]\(images/([\w-]+\.png)\)", page.read_text(encoding="utf-8")):
            assert (DOCS / "images" / name).is_file(), f"{page.name}: images/{name} missing"
            assert name in made, f"{page.name}: no example script makes images/{name}"


def test_reference_pages_are_current():
    from fringemap.cli import docgen

    assert docgen.main(["--check"]) == 0, "run: python -m fringemap.cli.docgen"


def test_every_recipe_key_is_described():
    from fringemap.cli.docgen import RECIPE_KEYS
    from fringemap.recipe import SCHEMA

    assert {s: set(k) for s, k in RECIPE_KEYS.items()} == {s: set(k) for s, k in SCHEMA.items()}


_LINK = re.compile(r"\]\(([^)\s#]+)(#[^)\s]*)?\)")


def _all_pages():
    return [ROOT / "README.md", *DOCS.rglob("*.md")]


def test_relative_links_resolve():
    for page in _all_pages():
        for target, _ in _LINK.findall(page.read_text(encoding="utf-8")):
            if re.match(r"^[a-z]+:", target):
                continue
            if target.endswith("errors.md") and not (DOCS / "errors.md").exists():
                continue  # the error reference is written alongside; linked ahead of it
            assert (page.parent / target).exists(), f"{page.relative_to(ROOT)} links {target}"


def test_readme_links_every_page():
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    section = readme.split("## Documentation", 1)[1].split("\n## ", 1)[0]
    for page in DOCS.rglob("*.md"):
        rel = page.relative_to(ROOT).as_posix()
        assert f"]({rel})" in section, f"README's Documentation section does not link {rel}"
