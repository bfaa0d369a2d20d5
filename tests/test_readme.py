"""The Python example of README.md runs and prints what the README says (doctest)."""

from __future__ import annotations

import doctest
import os
import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def test_readme_python_example_runs():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    blocks = re.findall(r"```python\n(.*?)```", text, flags=re.S)
    examples = [b for b in blocks if ">>>" in b]
    assert examples, "README.md has no Python example with >>> prompts"
    parser = doctest.DocTestParser()
    runner = doctest.DocTestRunner(optionflags=doctest.ELLIPSIS)
    cwd = os.getcwd()
    os.chdir(ROOT)  # the example names sample_images/ relative to the repository
    try:
        for i, block in enumerate(examples):
            test = parser.get_doctest(block, {}, f"README.md example {i + 1}", "README.md", 0)
            runner.run(test)
    finally:
        os.chdir(cwd)
    # the README's printed numbers must be what the code gives
    assert runner.failures == 0 and runner.tries >= 3
