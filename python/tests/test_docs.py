"""Every Python example in docs/python.md runs, in order, from the repository root."""

import os
import pathlib
import re

import pytest

ROOT = pathlib.Path(__file__).parents[2]
DOC = ROOT / "docs" / "python.md"


def blocks():
    text = DOC.read_text(encoding="utf-8")
    return re.findall(r"```python\n(.*?)```", text, flags=re.S)


def test_the_page_has_examples():
    assert len(blocks()) >= 5


def test_every_example_runs_in_order(capsys):
    code = blocks()
    if any("import torch" in c for c in code) and os.environ.get("CI") != "true":
        pytest.importorskip("torch", reason="the training-loop example needs torch")
    cwd = os.getcwd()
    os.chdir(ROOT)
    try:
        namespace = {"__name__": "__docs__"}
        for i, c in enumerate(code):
            exec(compile(c, f"{DOC}:block{i + 1}", "exec"), namespace)
    finally:
        os.chdir(cwd)
    out = capsys.readouterr().out
    assert "4 db 1" in out
    assert re.search(r"epoch 1: loss \d+\.\d+", out), out
