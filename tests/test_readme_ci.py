"""The README's test command is the one CI runs (so the two cannot drift apart)."""

from conftest import ROOT


def _readme_commands() -> list[str]:
    text = (ROOT / "README.md").read_text()
    blocks = text.split("```")[1::2]
    return [b.strip() for b in blocks if b.strip().startswith("python3 -m venv")]


def test_readme_gives_two_commands_and_ci_runs_the_test_one():
    commands = _readme_commands()
    assert len(commands) == 2
    test_cmd = next(c for c in commands if "pytest" in c)
    ci = (ROOT / ".ci" / "run").read_text()
    assert test_cmd in ci
