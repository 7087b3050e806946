"""Shared fixtures: the CLI binary and the demo data the Rust test driver points at."""

import json
import os
import pathlib
import subprocess

import pytest

BIN = os.environ.get("RETAKE_BIN", "retake")
DEMO = pathlib.Path(os.environ.get("RETAKE_DEMO", pathlib.Path(__file__).parents[2] / "demo_audio"))


def cli(*args, check=True):
    """Run the retake command line; return the finished process."""
    p = subprocess.run([BIN, *map(str, args)], capture_output=True, text=True)
    if check and p.returncode not in (0, 3):
        raise AssertionError(f"retake {' '.join(map(str, args))} exited {p.returncode}:\n{p.stderr}")
    return p


def read_jsonl(path):
    with open(path, encoding="utf-8") as f:
        return [json.loads(line) for line in f if line.strip()]


def demo_recipe_text(**top):
    """The demo recipe with its bank path made absolute (so the text can live anywhere) and
    top-level keys replaced."""
    text = (DEMO / "recipe.toml").read_text(encoding="utf-8")
    text = text.replace('bank = "noise"', f'bank = "{(DEMO / "noise").as_posix()}"')
    for key, value in top.items():
        lines = text.split("\n")
        lines = [f"{key} = {value}" if l.split("=")[0].strip() == key else l for l in lines]
        text = "\n".join(lines)
    return text


@pytest.fixture(scope="session")
def demo():
    return DEMO
