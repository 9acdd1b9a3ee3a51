"""The README's Quick start is what CI runs (common practice: one source of truth)."""

from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _commands():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    section = text.split("## Quick start", 1)[1].split("\n## ", 1)[0]
    return [line for line in section.splitlines() if line.startswith("python3 -m venv")]


def test_quick_start_has_exactly_two_commands():
    cmds = _commands()
    assert len(cmds) == 2
    assert "fringemap map demo_images/" in cmds[0]
    assert "pytest" in cmds[1]


def test_ci_runs_the_readme_test_command():
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    # CI extracts the first README line that creates a venv and runs pytest
    assert "grep -m1 -E '^python3 -m venv \\.venv && .*pytest' README.md" in ci
    assert _commands()[1].startswith("python3 -m venv .venv && ")


def test_demo_files_named_in_the_quick_start_exist():
    cmd = _commands()[0]
    for word in cmd.split():
        if word.startswith("demo_images/"):
            assert (ROOT / word).is_file(), word
