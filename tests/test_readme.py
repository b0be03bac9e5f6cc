"""The README's quickstart commands are the ones CI runs (so a green CI checks the README)."""

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

#: every distribution tests/test_notebooks.py imports or makes the kernel import (the inline
#: backend); the test extra must name each, so that the README's `pip install -e ".[test]"` alone
#: runs that test (it skips when one is missing)
NEEDS = ("nbformat", "nbclient", "ipykernel", "jupyter-client", "matplotlib-inline", "matplotlib")


def _test_extra() -> set[str]:
    text = (ROOT / "pyproject.toml").read_text(encoding="utf-8")
    block = re.search(r"^test = \[(.*?)^\]", text, flags=re.S | re.M)
    assert block, "pyproject.toml has no test extra"
    names = re.findall(r'"([A-Za-z0-9_.\-]+)', block.group(1))
    # distribution names compare case-, dash- and underscore-insensitively (PEP 503)
    return {re.sub(r"[-_.]+", "-", n).lower() for n in names}


def test_the_test_extra_installs_what_the_notebook_test_needs():
    missing = [n for n in NEEDS if n not in _test_extra()]
    assert missing == [], f"add to the test extra in pyproject.toml: {missing}"


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


def test_readme_and_save_say_what_a_saved_result_does_not_keep():
    # issue 12 item 2: the "exact round trip" promise names its one exception in both places
    import complexity as cx

    readme = " ".join((ROOT / "README.md").read_text(encoding="utf-8").split())
    assert "Not saved: `predictions`" in readme
    assert "every coefficient table `result.coefficients(c)` could give" in readme
    doc = " ".join((cx.SweepResult.save.__doc__ or "").split())
    assert "Not saved: ``predictions``" in doc
