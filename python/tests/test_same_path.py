"""Same code path: what the package makes in-process equals what `retake run` writes.

The reference for the CLI's float files is libsndfile (the `soundfile` package from PyPI),
which reads 32-bit float WAV samples exactly.
"""

import pathlib

import numpy as np
import soundfile as sf

import retake
from conftest import DEMO, cli, demo_recipe_text, read_jsonl


def run_cli(tmp_path, text):
    recipe = tmp_path / "recipe.toml"
    recipe.write_text(text, encoding="utf-8")
    out = tmp_path / "out"
    cli("run", recipe, "-i", DEMO / "manifest.jsonl", "-o", out)
    return recipe, out, read_jsonl(out / "manifest.jsonl")


def test_float32_takes_equal_the_cli_bit_for_bit(tmp_path):
    recipe_file, out, written = run_cli(tmp_path, demo_recipe_text(format='"float32"'))
    recipe = retake.Recipe.load(recipe_file)
    sources = {r["id"]: r for r in retake.read_manifest(DEMO / "manifest.jsonl")}
    assert len(written) == len(sources) * recipe.takes == 40
    for line in written:
        origin = line["origin"]
        take = recipe.take_of(sources[origin["source"]], origin["take"])
        on_disk, rate = sf.read(out / line["audio"], dtype="float32")
        assert rate == take.rate == 16000
        assert take.samples.dtype == np.float32
        assert take.samples.shape == on_disk.shape, line["id"]
        # Bit for bit: compare the IEEE patterns, so -0.0 and NaN could not hide.
        assert np.array_equal(take.samples.view(np.uint32), on_disk.view(np.uint32)), line["id"]
        assert take.record == line, line["id"]
        assert take.origin == origin and take.lines == line.get("lines")


def test_corpus_takes_equal_the_cli(tmp_path):
    recipe_file, out, written = run_cli(tmp_path, demo_recipe_text(format='"float32"'))
    recipe = retake.Recipe.load(recipe_file)
    corpus = retake.Corpus(DEMO / "manifest.jsonl")
    index = {cid: i for i, cid in enumerate(corpus.ids)}
    for line in written[::3]:
        origin = line["origin"]
        take = corpus.take(recipe, index[origin["source"]], origin["take"])
        on_disk, _ = sf.read(out / line["audio"], dtype="float32")
        assert np.array_equal(take.samples.view(np.uint32), on_disk.view(np.uint32))
        assert take.record == line


def test_pcm16_takes_written_by_the_package_equal_the_cli_files_byte_for_byte(tmp_path):
    recipe_file, out, written = run_cli(tmp_path, demo_recipe_text())
    recipe = retake.Recipe.load(recipe_file)
    assert recipe.format == "pcm16"
    sources = {r["id"]: r for r in retake.read_manifest(DEMO / "manifest.jsonl")}
    mine = tmp_path / "mine"
    mine.mkdir()
    for line in written:
        origin = line["origin"]
        take = recipe.take_of(sources[origin["source"]], origin["take"])
        dest = mine / pathlib.Path(line["audio"]).name
        take.write(dest)
        assert dest.read_bytes() == (out / line["audio"]).read_bytes(), line["id"]
        assert take.record == line


def test_make_take_from_arrays_equals_the_take_from_the_file(tmp_path):
    recipe = retake.Recipe.from_toml(demo_recipe_text(format='"float32"'), folder=DEMO)
    record = retake.read_manifest(DEMO / "manifest.jsonl")[2]
    samples, rate = retake.decode(record["audio"])
    ref, ref_rate = sf.read(record["audio"], dtype="float32")
    assert rate == ref_rate
    # The library's decoder reads the demo's 16-bit files as libsndfile does (x / 32768).
    assert np.array_equal(samples, ref if ref.ndim == 1 else ref.mean(axis=1, dtype=np.float32))
    for k in range(recipe.takes):
        a = recipe.take_of(record, k)
        b = recipe.make_take(samples, rate, record["id"], lines=record["lines"], k=k)
        assert np.array_equal(a.samples, b.samples)
        # Only the carried-through fields of the manifest line (site, zone) differ.
        ra, rb = a.record, b.record
        for extra in ("site", "zone"):
            ra.pop(extra, None)
        assert ra == rb


def test_write_and_read_manifest_round_trip(tmp_path):
    records = retake.read_manifest(DEMO / "manifest.jsonl")
    assert all(pathlib.Path(r["audio"]).is_absolute() for r in records)
    path = tmp_path / "copy.jsonl"
    retake.write_manifest(path, records)
    assert retake.read_manifest(path) == records
    assert [r["id"] for r in read_jsonl(path)] == [r["id"] for r in records]


def test_a_batch_run_in_process_writes_what_the_cli_writes(tmp_path):
    recipe_file, out, _ = run_cli(tmp_path, demo_recipe_text())
    recipe = retake.Recipe.load(recipe_file)
    calls = []
    here = tmp_path / "in-process"
    summary = retake.run(recipe, DEMO / "manifest.jsonl", here, threads=2,
                         progress=lambda done, total, ok: calls.append((done, total, ok)))
    assert summary["clips_done"] == 10 and summary["takes"] == 40 and summary["rejected"] == 0
    assert sorted(c[0] for c in calls) == list(range(1, 11)) and {c[1] for c in calls} == {10}
    for name in ["manifest.jsonl", "rejects.jsonl"]:
        assert (here / name).read_bytes() == (out / name).read_bytes(), name
    for line in read_jsonl(out / "manifest.jsonl"):
        assert (here / line["audio"]).read_bytes() == (out / line["audio"]).read_bytes()

    # The memory limit is the CLI's `--max-clip-memory`: 1 MiB turns every clip into the
    # same reject, pointing at `retake slice`.
    small = tmp_path / "small"
    summary = retake.run(recipe, DEMO / "manifest.jsonl", small, max_clip_memory=1)
    assert summary["rejected"] == 10 and summary["takes"] == 0
    cli("run", recipe_file, "-i", DEMO / "manifest.jsonl", "-o", tmp_path / "small-cli",
        "--max-clip-memory", "1")
    rejects = (small / "rejects.jsonl").read_text(encoding="utf-8")
    assert rejects == (tmp_path / "small-cli" / "rejects.jsonl").read_text(encoding="utf-8")
    assert all("retake slice" in r["reason"] for r in read_jsonl(small / "rejects.jsonl"))
