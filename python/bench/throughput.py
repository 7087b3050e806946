"""In-process takes beside the command line, on the demo recipe and clips.

    python python/bench/throughput.py [--bin target/release/retake] [--reps 5]

Prints, as medians of interleaved repetitions (seconds of take audio per wall second):
  1. the CLI (`retake run -j 1`) and the package's take loop in one Python thread, and
     their ratio (the per-core cost of the same takes);
  2. two Python threads calling the package at once against one (is the GIL released?);
  3. a 2-worker torch DataLoader over TakeDataset, beside the same loop that calls
     `retake run` once per batch and reads the takes back with soundfile.
The CLI also writes its takes to disk; the package returns them in memory, as a training
loop uses them.
"""

import argparse
import json
import pathlib
import shutil
import statistics
import subprocess
import tempfile
import threading
import time

import soundfile as sf

import retake

ROOT = pathlib.Path(__file__).resolve().parents[2]
DEMO = ROOT / "demo_audio"


def cli_run(bin_, recipe, manifest, out, threads=1):
    shutil.rmtree(out, ignore_errors=True)
    t = time.perf_counter()
    subprocess.run([bin_, "run", recipe, "-i", manifest, "-o", out, "-j", str(threads)],
                   check=True, capture_output=True)
    wall = time.perf_counter() - t
    seconds = sum(json.loads(l)["duration"] for l in open(out / "manifest.jsonl"))
    return seconds / wall


def package_loop(recipe, jobs):
    t = time.perf_counter()
    seconds = sum(recipe.take_of(r, k).duration for r, k in jobs)
    return seconds / (time.perf_counter() - t)


def package_threads(recipe, jobs, n):
    parts = [jobs[i::n] for i in range(n)]
    totals = [0.0] * n

    def work(i):
        totals[i] = sum(recipe.take_of(r, k).duration for r, k in parts[i])

    threads = [threading.Thread(target=work, args=(i,)) for i in range(n)]
    t = time.perf_counter()
    for th in threads:
        th.start()
    for th in threads:
        th.join()
    return sum(totals) / (time.perf_counter() - t)


def loader_rate(dataset, batch):
    import torch

    loader = torch.utils.data.DataLoader(dataset, batch_size=batch, num_workers=2,
                                         collate_fn=list)
    t = time.perf_counter()
    seconds = sum(len(it["samples"]) / it["rate"] for b in loader for it in b)
    return seconds / (time.perf_counter() - t)


def cli_per_batch_rate(bin_, recipe_file, records, batch, tmp):
    """The loop without the package: one `retake run` per batch of clips, takes read back."""
    t = time.perf_counter()
    seconds = 0.0
    clips_per_batch = max(1, batch // 4)
    for i in range(0, len(records), clips_per_batch):
        m = tmp / "batch.jsonl"
        retake.write_manifest(m, records[i:i + clips_per_batch])
        out = tmp / "batch-out"
        shutil.rmtree(out, ignore_errors=True)
        subprocess.run([bin_, "run", recipe_file, "-i", m, "-o", out, "-j", "2"],
                       check=True, capture_output=True)
        for line in open(out / "manifest.jsonl"):
            x, rate = sf.read(out / json.loads(line)["audio"], dtype="float32")
            seconds += len(x) / rate
    return seconds / (time.perf_counter() - t)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--bin", default=str(ROOT / "target/release/retake"))
    ap.add_argument("--reps", type=int, default=5)
    ap.add_argument("--repeat", type=int, default=3, help="demo clips repeated this often")
    args = ap.parse_args()
    tmp = pathlib.Path(tempfile.mkdtemp())
    recipe_file = DEMO / "recipe.toml"
    recipe = retake.Recipe.load(recipe_file)
    records = [dict(r, id=f"{r['id']}-{n}") for n in range(args.repeat)
               for r in retake.read_manifest(DEMO / "manifest.jsonl")]
    manifest = tmp / "manifest.jsonl"
    retake.write_manifest(manifest, records)
    jobs = [(r, k) for r in records for k in range(recipe.takes)]
    dataset = retake.TakeDataset(manifest, recipe)
    rows = {k: [] for k in ("cli1", "pkg1", "thr1", "thr2", "loader", "cliloop")}
    try:
        import torch  # noqa: F401
        have_torch = True
    except ImportError:
        have_torch = False
    for _ in range(args.reps):
        rows["cli1"].append(cli_run(args.bin, recipe_file, manifest, tmp / "out"))
        rows["pkg1"].append(package_loop(recipe, jobs))
        rows["thr1"].append(package_threads(recipe, jobs, 1))
        rows["thr2"].append(package_threads(recipe, jobs, 2))
        if have_torch:
            rows["loader"].append(loader_rate(dataset, 8))
        rows["cliloop"].append(cli_per_batch_rate(args.bin, recipe_file, records, 8, tmp))
    med = {k: statistics.median(v) if v else float("nan") for k, v in rows.items()}
    print(f"{len(records)} clips x {recipe.takes} takes, medians of {args.reps} interleaved reps "
          "(seconds of take audio per wall second)")
    print(f"  CLI run -j 1            {med['cli1']:9.1f}")
    print(f"  package, one thread     {med['pkg1']:9.1f}   ratio to CLI {med['pkg1'] / med['cli1']:.2f}")
    print(f"  package, 1 vs 2 threads {med['thr1']:9.1f} -> {med['thr2']:9.1f}   "
          f"scaling {med['thr2'] / med['thr1']:.2f}x")
    print(f"  DataLoader, 2 workers   {med['loader']:9.1f}")
    print(f"  CLI per batch of 8      {med['cliloop']:9.1f}   loader / CLI loop "
          f"{med['loader'] / med['cliloop']:.2f}")
    shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    main()
