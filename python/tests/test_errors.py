"""Errors are Python exceptions with the CLI's messages and their place; nothing crashes."""

import json

import numpy as np
import pytest
import soundfile as sf

import retake
from conftest import DEMO, cli, read_jsonl


BAD = 'seed = 1\ntakes = 2\n\n[[step]]\ndo = "gain"\ndb = { low = 6, high = -6 }\n'


def test_a_bad_recipe_raises_with_file_line_and_key(tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text(BAD, encoding="utf-8")
    with pytest.raises(retake.RecipeError) as info:
        retake.Recipe.load(path)
    e = info.value
    assert (e.file, e.line, e.field, e.step) == (str(path), 6, "db", 1)
    assert isinstance(e, retake.RetakeError)
    # The same message the command line prints for the same file.
    p = cli("plan", path, check=False)
    assert str(e) in p.stderr, p.stderr


def test_unknown_keys_and_steps_are_named(tmp_path):
    with pytest.raises(retake.RecipeError) as info:
        retake.Recipe.from_toml('takes = 2\n[[step]]\ndo = "sped"\n', folder=tmp_path)
    assert (info.value.line, info.value.field, info.value.step) == (3, "do", 1)
    assert "did you mean `speed`" in str(info.value)
    with pytest.raises(retake.RecipeError) as info:
        retake.Recipe.from_toml("takes = 2\nseeed = 3\n")
    assert (info.value.line, info.value.field, info.value.step) == (2, "seeed", None)


def test_a_nan_clip_raises_clip_error_and_the_interpreter_goes_on(tmp_path):
    recipe = retake.Recipe.from_toml('takes = 2\n[[step]]\ndo = "gain"\ndb = -3\n')
    x = np.zeros(16000, dtype=np.float32)
    x[1234] = np.nan
    with pytest.raises(retake.ClipError) as info:
        recipe.make_take(x, 16000, "nan-clip", k=1)
    assert info.value.field == "audio" and "sample 1234" in str(info.value)
    assert info.value.kind == "audio"

    # From a file in a manifest: the error names the manifest line, as rejects.jsonl does.
    sf.write(tmp_path / "nan.wav", x, 16000, subtype="FLOAT")
    manifest = tmp_path / "m.jsonl"
    good = retake.read_manifest(DEMO / "manifest.jsonl")[0]
    lines = [good, {"id": "nan-clip", "audio": "nan.wav", "text": "nothing"}]
    manifest.write_text("".join(json.dumps(r) + "\n" for r in lines), encoding="utf-8")
    corpus = retake.Corpus(manifest)
    with pytest.raises(retake.ClipError) as info:
        corpus.take(recipe, 1, 0)
    e = info.value
    assert (e.file, e.line, e.field) == (str(manifest), 2, "audio")
    recipe_file = tmp_path / "r.toml"
    recipe_file.write_text('takes = 2\n[[step]]\ndo = "gain"\ndb = -3\n', encoding="utf-8")
    cli("run", recipe_file, "-i", manifest, "-o", tmp_path / "out")
    (reject,) = read_jsonl(tmp_path / "out" / "rejects.jsonl")
    assert reject["line"] == 2 and reject["field"] == "audio"
    assert reject["reason"] in str(e)
    # Still alive, still working.
    assert corpus.take(recipe, 0, 1).duration > 0


def test_bad_labels_and_manifests_raise(tmp_path):
    recipe = retake.Recipe.from_toml("takes = 1\n")
    with pytest.raises(retake.ClipError) as info:
        recipe.make_take(np.zeros(8000, np.float32), 8000, "a",
                         lines=[{"start": 0.4, "end": 0.2, "text": "late"}])
    assert info.value.field.startswith("lines[0]") and info.value.kind == "labels"
    bad = tmp_path / "bad.jsonl"
    bad.write_text('{"id": "a", "audio": "a.wav", "text": "x"}\n{"id": "b", "audio": 3}\n')
    with pytest.raises(retake.ManifestError) as info:
        retake.read_manifest(bad)
    assert (info.value.file, info.value.line, info.value.field) == (str(bad), 2, "audio")
    with pytest.raises(retake.ManifestError):
        retake.write_manifest(tmp_path / "w.jsonl", [{"id": "a"}])
    assert not (tmp_path / "w.jsonl").exists()
