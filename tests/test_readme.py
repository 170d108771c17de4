"""The README's Python example runs as printed (from the repository's root, as a new user would
from a clone)."""

from __future__ import annotations

import os
import pathlib
import re

ROOT = pathlib.Path(__file__).resolve().parent.parent


def test_readme_python_example_runs(capsys) -> None:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    blocks = re.findall(r"```python\n(.*?)```", text, flags=re.S)
    assert len(blocks) == 1
    cwd = os.getcwd()
    os.chdir(ROOT)
    names: dict = {}
    try:
        exec(compile(blocks[0], "README.md", "exec"), names)
    finally:
        os.chdir(cwd)
    out = capsys.readouterr().out.splitlines()
    assert out[0].startswith("gyro.x [")
    # the record was simulated at the datasheet's typical values: the fitted white density's
    # 90 % interval holds the model's (seeded: it holds for this seed, at ~90 % over seeds)
    truth = names["gyro"].term("white").density
    white = next(t for t in names["fit"].terms if t.term == "white")
    assert white.low <= truth <= white.high
    assert out[-1] == names["report"].overall in ("pass", "fail", "inconclusive")
