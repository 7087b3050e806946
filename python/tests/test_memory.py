"""No leak: thousands of takes in a loop leave resident memory flat."""

import numpy as np

import retake


def rss_kib():
    with open("/proc/self/status") as f:
        for line in f:
            if line.startswith("VmRSS:"):
                return int(line.split()[1])
    raise RuntimeError("no VmRSS")


def test_five_thousand_takes_leave_resident_memory_flat():
    recipe = retake.Recipe.from_toml(
        'seed = 5\ntakes = 2\n'
        '[[step]]\ndo = "speed"\nfactor = { low = 0.9, high = 1.1 }\n'
        '[[step]]\ndo = "gain"\ndb = { low = -6, high = 6 }\n'
        '[[step]]\ndo = "mask"\ntime_masks = 1\ntime_width_s = { low = 0.01, high = 0.05 }\n'
    )
    rng = np.random.default_rng(7)
    x = (0.1 * rng.standard_normal(4000)).astype(np.float32)
    lines = [{"start": 0.05, "end": 0.2, "text": "dock",
              "words": [{"start": 0.05, "end": 0.2, "text": "dock"}]}]
    for k in range(500):  # warm-up: allocator pools, numpy, json
        recipe.make_take(x, 16000, "clip", lines=lines, k=k).frame_targets(0.01)
    before = rss_kib()
    for k in range(500, 5500):
        t = recipe.make_take(x, 16000, "clip", lines=lines, k=k)
        t.record, t.samples, t.frame_targets(0.01)
    grown = rss_kib() - before
    # Bound stated: under 8 MiB over 5,000 takes of 0.25 s (a leak of one take's samples
    # each time would be about 20 MiB; of its record, more).
    assert grown < 8 * 1024, f"resident memory grew by {grown} KiB over 5,000 takes"
