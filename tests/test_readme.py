"""The README's quickstart commands are the ones CI runs (so a green CI checks the README)."""

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _bash_blocks(text):
    return [b.strip() for b in re.findall(r"```bash\n(.*?)```", text, flags=re.S)]


def test_quickstart_has_exactly_two_commands_and_ci_runs_the_test_one():
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    quick = readme.split("## Quickstart", 1)[1].split("\n## ", 1)[0]
    blocks = _bash_blocks(quick)
    assert len(blocks) == 2
    setup_demo, setup_test = blocks
    assert "python -m complexity demo" in setup_demo
    assert "pytest" in setup_test
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    assert setup_test in ci.splitlines()


def test_readme_states_the_cautions():
    readme = (ROOT / "README.md").read_text(encoding="utf-8").lower()
    for phrase in ("no extrapolation", "reference standards", "local codes and licensed practice"):
        assert phrase in readme
