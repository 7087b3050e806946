"""The dataset's contract: the same (recipe seed, clip id, take index, epoch) gives the same
item in any process and any worker setup; a new epoch gives new takes."""

import hashlib
import json
import multiprocessing as mp
import subprocess
import sys

import numpy as np
import pytest

import retake
from conftest import DEMO, demo_recipe_text


def digest(item):
    h = hashlib.sha256(np.ascontiguousarray(item["samples"]).tobytes())
    h.update(json.dumps(item["record"], sort_keys=True).encode())
    return h.hexdigest()


def make_dataset(epoch=0):
    recipe = retake.Recipe.from_toml(demo_recipe_text(), folder=DEMO, name="recipe.toml")
    return retake.TakeDataset(DEMO / "manifest.jsonl", recipe, epoch=epoch, frame_hop=0.01)


# Items spread over clips and take slots; all 40 would only make the test slower.
INDICES = [0, 1, 2, 3, 5, 10, 17, 22, 31, 39]


def digests_of(ds, indices=INDICES):
    return [digest(ds[i]) for i in indices]


_worker_ds = None


def _init(ds):
    global _worker_ds
    _worker_ds = ds


def _work(i):
    return digest(_worker_ds[i])


@pytest.fixture(scope="module")
def reference():
    return digests_of(make_dataset(0))


def test_length_and_take_indices():
    ds = make_dataset(0)
    assert len(ds) == 10 * 4
    assert [ds.take_index(j) for j in range(4)] == [0, 1, 2, 3]
    ds.set_epoch(3)
    # keep_source: slot 0 is the untouched source in every epoch.
    assert [ds.take_index(j) for j in range(4)] == [0, 13, 14, 15]


def test_epoch_zero_items_are_the_run_takes():
    ds = make_dataset(0)
    recipe = ds.recipe
    sources = retake.read_manifest(DEMO / "manifest.jsonl")
    for i in (0, 6, 13):
        clip, j = divmod(i, 4)
        assert digest(ds[i]) == digest({"samples": recipe.take_of(sources[clip], j).samples,
                                        "record": recipe.take_of(sources[clip], j).record})


def test_a_fresh_process_gives_the_same_items(reference):
    code = (
        "import sys, json; sys.path.insert(0, sys.argv[1]);"
        "import test_dataset as t; print(json.dumps(t.digests_of(t.make_dataset(0))))"
    )
    here = str(__import__("pathlib").Path(__file__).parent)
    out = subprocess.run([sys.executable, "-c", code, here], capture_output=True, text=True, check=True)
    assert json.loads(out.stdout) == reference


@pytest.mark.parametrize("method", ["fork", "spawn"])
def test_worker_processes_give_the_same_items(method, reference):
    ds = make_dataset(0)
    # Start the parent's use first, so a forked child inherits a used library.
    ds[0]
    with mp.get_context(method).Pool(2, initializer=_init, initargs=(ds,)) as pool:
        assert pool.map(_work, INDICES) == reference


def test_epochs_give_new_takes_but_keep_the_source(reference):
    ds = make_dataset(1)
    again = digests_of(ds)
    for i, a, b in zip(INDICES, reference, again):
        if i % 4 == 0:
            assert a == b, f"item {i}: the source slot must not change between epochs"
        else:
            assert a != b, f"item {i}: epoch 1 gave epoch 0's take"
    ds.set_epoch(0)
    assert digests_of(ds) == reference


def test_frame_targets_follow_the_rewritten_words():
    ds = make_dataset(0)
    for i in (1, 2, 3):
        item = ds[i]
        frames = item["frames"]
        words = [w for line in item["record"]["lines"] for w in line.get("words", [])]
        n = len(frames["word"])
        assert n == int(np.ceil(len(item["samples"]) / item["rate"] / 0.01 - 1e-9))
        centres = (np.arange(n) + 0.5) * 0.01
        # Recomputed with numpy from the record: a frame is in the word holding its centre.
        expect = np.full(n, -1)
        for wi, w in enumerate(words):
            expect[(centres >= w["start"]) & (centres < w["end"])] = wi
        assert np.array_equal(frames["word"], expect)
        hidden = {wi: w.get("obscured", 0.0) for wi, w in enumerate(words)}
        for f in range(n):
            wi = frames["word"][f]
            want = hidden[wi] if wi >= 0 else 0.0
            assert frames["obscured"][f] == np.float32(want)


def test_a_torch_dataloader_with_two_workers():
    torch = pytest.importorskip("torch", reason="torch is not installed in this venv")
    ds = make_dataset(0)
    loader = torch.utils.data.DataLoader(
        torch.utils.data.Subset(ds, INDICES), batch_size=3, num_workers=2, collate_fn=list
    )
    got = [digest(item) for batch in loader for item in batch]
    assert got == [digest(ds[i]) for i in INDICES]
