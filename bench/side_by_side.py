#!/usr/bin/env python3
"""retake beside the hand-written numpy/scipy chain, on the same corpus and machine.

Makes the shared synthetic corpus (../shared/bench/make_corpus.py) under bench/data/, then
runs, interleaved and several times, at 1 and 2 workers:

  reference  reference_chain.py --stages speed,room,noise,mask --takes 2
  retake     target/release/retake run bench/side_by_side.toml (the same chain as a recipe)

and prints per configuration the median seconds of audio per wall second, the ratio
retake / reference, each tool's 2-worker scaling, its CPU time per audio second and the
peak memory of its whole process tree.

Build the binary first: `cargo build --release` (this script does not build it).

Audio seconds are counted the same way for both: the frames of every WAV file each run
wrote, read from the file headers. Memory is measured from a monitor process that starts
each run (so each run is a fresh child): `tree peak` is the largest sum over the run's
process tree of each process's proportional set size (Pss, /proc/PID/smaps_rollup, so
pages shared by forked workers count once), polled every 20 ms; `largest` is the largest
single process's peak RSS (getrusage RUSAGE_CHILDREN). CPU time is the run's user + system
time (getrusage of the children). The machine is shared: wall figures are noisy, CPU
figures less so.

Needs numpy, scipy and soundfile (the reference chain's own needs); this script itself uses
the standard library only.
"""
import argparse
import json
import os
import resource
import shutil
import statistics
import subprocess
import sys
import time
import wave

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
DATA = os.path.join(HERE, "data")
RECIPE = os.path.join(HERE, "side_by_side.toml")
TAKES = 2  # the recipe's `takes`; the reference is given the same
SEED = 7


def shared_dir():
    """The shared benchmark folder: $RETAKE_SHARED_BENCH, else ../shared/bench beside the
    checkout's parent (where the worktrees and the main checkout sit)."""
    env = os.environ.get("RETAKE_SHARED_BENCH")
    if env:
        return env
    for base in (os.path.dirname(ROOT), os.path.dirname(os.path.dirname(ROOT))):
        cand = os.path.join(base, "shared", "bench")
        if os.path.isfile(os.path.join(cand, "reference_chain.py")):
            return cand
    sys.exit("cannot find shared/bench/reference_chain.py: set RETAKE_SHARED_BENCH")


def make_corpus(shared, hours):
    """The corpus under bench/data/ (corpus/, noise/, rooms/), made again only when the
    hours asked for differ from the ones it was made with."""
    stamp = os.path.join(DATA, "made.json")
    want = {"hours": hours, "seed": 1234}
    if os.path.isfile(stamp):
        with open(stamp) as f:
            if json.load(f) == want:
                return
    shutil.rmtree(DATA, ignore_errors=True)
    os.makedirs(DATA)
    subprocess.run([sys.executable, os.path.join(shared, "make_corpus.py"), "--hours", str(hours),
                    "--out", os.path.join(DATA, "corpus"), "--seed", "1234"], check=True)
    with open(stamp, "w") as f:
        json.dump(want, f)


def audio_seconds(folder):
    """Seconds of audio in every .wav under `folder`, from the headers."""
    total = 0.0
    for d, _, files in os.walk(folder):
        for name in files:
            if name.endswith(".wav"):
                with wave.open(os.path.join(d, name)) as w:
                    total += w.getnframes() / w.getframerate()
    return total


# --- the monitor: runs one command as a fresh child and measures it ---------------------

def tree_pids(root):
    """`root` and every process below it, from /proc."""
    children = {}
    for p in os.listdir("/proc"):
        if not p.isdigit():
            continue
        try:
            with open(f"/proc/{p}/stat") as f:
                ppid = int(f.read().rsplit(")", 1)[1].split()[1])
        except (OSError, IndexError, ValueError):
            continue
        children.setdefault(ppid, []).append(int(p))
    out, todo = [], [root]
    while todo:
        p = todo.pop()
        out.append(p)
        todo.extend(children.get(p, []))
    return out


def pss_kib(pid):
    try:
        with open(f"/proc/{pid}/smaps_rollup") as f:
            for line in f:
                if line.startswith("Pss:"):
                    return int(line.split()[1])
    except OSError:
        pass
    return 0


def monitor(cmd):
    t0 = time.perf_counter()
    child = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    peak = 0
    while child.poll() is None:
        peak = max(peak, sum(pss_kib(p) for p in tree_pids(child.pid)))
        time.sleep(0.02)
    wall = time.perf_counter() - t0
    err = child.stderr.read().decode(errors="replace")
    ru = resource.getrusage(resource.RUSAGE_CHILDREN)
    print(json.dumps({"rc": child.returncode, "wall": wall, "cpu": ru.ru_utime + ru.ru_stime,
                      "tree_kib": peak, "largest_kib": ru.ru_maxrss, "stderr": err[-2000:]}))


def measured(cmd):
    """Run `cmd` under a fresh monitor process; its figures."""
    r = subprocess.run([sys.executable, os.path.abspath(__file__), "--monitor", "--", *cmd],
                       capture_output=True, text=True, check=True)
    m = json.loads(r.stdout)
    if m["rc"] != 0:
        sys.exit(f"{cmd[0]} failed ({m['rc']}):\n{m['stderr']}")
    return m


# --- the two chains --------------------------------------------------------------------

def reference_cmd(shared, workers, out):
    c = os.path.join(DATA, "corpus")
    return [sys.executable, os.path.join(shared, "reference_chain.py"),
            "--manifest", os.path.join(c, "manifest.jsonl"), "--noise", os.path.join(DATA, "noise"),
            "--rooms", os.path.join(DATA, "rooms"), "--out", out, "--takes", str(TAKES),
            "--seed", str(SEED), "--workers", str(workers), "--stages", "speed,room,noise,mask"]


def retake_cmd(binary, workers, out):
    return [binary, "run", RECIPE, "--input", os.path.join(DATA, "corpus", "manifest.jsonl"),
            "--out", out, "--threads", str(workers)]


def main():
    ap = argparse.ArgumentParser(description=__doc__,
                                 formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--hours", type=float, default=0.25,
                    help="corpus size in hours (default 0.25: a run of a few minutes; "
                         "2 takes each, so twice that of output)")
    ap.add_argument("--reps", type=int, default=3, help="repetitions of every configuration")
    ap.add_argument("--binary", default=os.path.join(ROOT, "target", "release", "retake"),
                    help="the retake binary (default: target/release/retake, built by you)")
    ap.add_argument("--scratch", default=os.path.join(DATA, "out"),
                    help="output folder of the runs (emptied before each run)")
    ap.add_argument("--json", help="also write every run's figures here")
    ap.add_argument("--monitor", action="store_true", help=argparse.SUPPRESS)
    ap.add_argument("cmd", nargs="*", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.monitor:
        return monitor(args.cmd)
    if not os.access(args.binary, os.X_OK):
        sys.exit(f"{args.binary} is missing: run `cargo build --release` first")

    shared = shared_dir()
    make_corpus(shared, args.hours)
    audio_in = audio_seconds(os.path.join(DATA, "corpus"))
    print(f"corpus: {audio_in:.0f} s of audio, {TAKES} takes per clip; "
          f"{args.reps} repetitions, interleaved", flush=True)

    tools = {"reference": lambda w, o: reference_cmd(shared, w, o),
             "retake": lambda w, o: retake_cmd(args.binary, w, o)}
    runs = []
    for rep in range(args.reps):
        for workers in (1, 2):
            for tool, cmd in tools.items():
                out = os.path.join(args.scratch, tool)
                shutil.rmtree(out, ignore_errors=True)
                m = measured(cmd(workers, out))
                m.update(tool=tool, workers=workers, rep=rep, audio_s=audio_seconds(out))
                m.pop("stderr")
                runs.append(m)
                print(f"  rep {rep + 1} {tool:9} {workers} worker(s): {m['audio_s'] / m['wall']:7.0f} "
                      f"s/s, {m['wall']:6.2f} s wall, {m['cpu']:6.2f} s CPU, "
                      f"tree peak {m['tree_kib'] / 1024:6.1f} MiB", flush=True)
    shutil.rmtree(args.scratch, ignore_errors=True)
    if args.json:
        with open(args.json, "w") as f:
            json.dump(runs, f, indent=1)

    def med(tool, workers, key):
        return statistics.median(key(r) for r in runs if r["tool"] == tool and r["workers"] == workers)

    rate = lambda r: r["audio_s"] / r["wall"]
    cpu_rate = lambda r: r["audio_s"] / r["cpu"]
    audio_out = med("retake", 1, lambda r: r["audio_s"])
    ref_out = med("reference", 1, lambda r: r["audio_s"])
    print(f"\naudio written per run: retake {audio_out:.1f} s, reference {ref_out:.1f} s")
    print("medians over the repetitions (wall figures on a shared machine: noisy)\n")
    print(f"{'workers':>7} {'tool':>9} {'audio s/wall s':>14} {'audio s/CPU s':>13} "
          f"{'tree peak MiB':>13} {'largest MiB':>11}")
    for workers in (1, 2):
        for tool in tools:
            print(f"{workers:>7} {tool:>9} {med(tool, workers, rate):>14.0f} "
                  f"{med(tool, workers, cpu_rate):>13.0f} "
                  f"{med(tool, workers, lambda r: r['tree_kib']) / 1024:>13.1f} "
                  f"{med(tool, workers, lambda r: r['largest_kib']) / 1024:>11.1f}")
    print()
    for workers in (1, 2):
        print(f"retake / reference at {workers} worker(s): "
              f"{med('retake', workers, rate) / med('reference', workers, rate):.2f}x wall, "
              f"{med('retake', workers, cpu_rate) / med('reference', workers, cpu_rate):.2f}x CPU")
    for tool in tools:
        print(f"{tool}: 2 workers / 1 worker = {med(tool, 2, rate) / med(tool, 1, rate):.2f}x")


if __name__ == "__main__":
    main()
