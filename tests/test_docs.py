"""README.md and DEVELOPERS.md match their sections in docs/, and the README keeps its promises."""

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def test_readme_and_guide_are_assembled_from_sections():
    proc = subprocess.run(
        [sys.executable, str(ROOT / "tools" / "build_readme.py"), "--check"], capture_output=True, text=True
    )
    assert proc.returncode == 0, proc.stderr


def test_readme_quick_start_is_two_commands_and_ci_runs_the_test_one():
    text = (ROOT / "README.md").read_text()
    block = text.split("## Quick start", 1)[1].split("```bash", 1)[1].split("```", 1)[0]
    commands = [line.split("#")[0].strip() for line in block.strip().splitlines() if line.strip()]
    assert len(commands) == 2
    assert "matgen demo" in commands[0]
    assert "pytest" in commands[1]
    ci = (ROOT / ".ci" / "run").read_text()
    ci_command = ci.split("TEST_COMMAND='", 1)[1].split("'\n", 1)[0]
    assert ci_command == commands[1]  # CI runs exactly the README's test command
    assert 'bash -c "$TEST_COMMAND"' in ci


def test_readme_says_imagery_only():
    text = (ROOT / "README.md").read_text().lower()
    assert "imagery only" in text and "clinical" in text and "dosimetric" in text
