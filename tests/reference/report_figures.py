"""The report page's figures, recomputed from the run's own files.

    python report_figures.py PAGE.json MANIFEST.jsonl REJECTS.jsonl

Reads manifest.jsonl and rejects.jsonl with Python's json module and recomputes: takes,
clips, hours in and out, rejects, per-step run counts, words and obscured counts, label
validity, and for every histogram on the page the bin counts against the page's own bin
edges with numpy.histogram (or per value, for value sets shown one bar per value). Word
length change goes through the take's time map inverted here, independently: a take time
comes from the first rising piece of the map that reaches it.

Prints JSON: {"figures": {...}, "steps": [...], "charts": [{"counts": [...],
"ambiguous": n}, ...]} in the page's chart order. Word-length changes are rounded to 1e-9 %
as the page does; `ambiguous` counts those within 1e-3 of a rounding tie (which two float
computations may round apart); values copied from the manifest are never ambiguous.
"""

import json
import sys

import numpy as np

TIME_STEPS = {"speed", "stretch", "warp", "pitch"}

page = json.load(open(sys.argv[1]))
takes = [json.loads(l) for l in open(sys.argv[2], encoding="utf-8")]
rejects = [json.loads(l) for l in open(sys.argv[3], encoding="utf-8") if l.strip()]


def source_time(src, tk, y):
    for i in range(len(src) - 1):
        if tk[i + 1] > tk[i] and tk[i] <= y <= tk[i + 1]:
            return src[i] + (y - tk[i]) / (tk[i + 1] - tk[i]) * (src[i + 1] - src[i])
    return src[0] if y < tk[0] else src[-1]


def valid(t):
    d = t["duration"]
    last = -1.0
    for line in t.get("lines") or []:
        if not (0 <= line["start"] <= line["end"] <= d + 1e-4) or line["start"] < last:
            return False
        last = line["start"]
        w_last = line["start"]
        for w in line.get("words", []):
            if not (line["start"] <= w["start"] <= w["end"] <= line["end"]) or w["start"] < w_last:
                return False
            w_last = w["end"]
    return True


values = {}  # (step index, field) -> list
change = {}  # group -> list of percent changes
obscured = []
words = quarter = half = 0
for t in takes:
    o = t["origin"]
    for i, s in enumerate(o["steps"]):
        if not s["ran"]:
            continue
        for part in ("drawn", "measured"):
            for k, v in s.get(part, {}).items():
                if isinstance(v, bool) or isinstance(v, str):
                    continue
                if isinstance(v, (int, float)):
                    values.setdefault((i, f"{part}.{k}"), []).append(float(v))
                elif isinstance(v, list):
                    for p in v:
                        if isinstance(p, list) and len(p) == 2:
                            values.setdefault((i, f"{part}.{k} width"), []).append(p[1] - p[0])
    moved = [s["step"] for s in o["steps"] if s["ran"] and s["step"] in TIME_STEPS]
    group = " + ".join(moved) if moved else "none"
    src, tk = o["time_map"]["source"], o["time_map"]["take"]
    for line in t.get("lines") or []:
        for w in line.get("words", []):
            words += 1
            ob = w.get("obscured", 0.0)
            if ob > 0:
                obscured.append(ob)
            quarter += ob > 0.25
            half += ob > 0.5
            if w["end"] <= w["start"]:
                continue
            n = source_time(src, tk, w["end"]) - source_time(src, tk, w["start"])
            if n > 0:
                c = ((w["end"] - w["start"]) / n - 1) * 100
                # The page rounds changes to 1e-9 % (so a word left alone reads exactly 0);
                # a value within 1e-3 of a rounding tie may round either way: ambiguous.
                scaled = c * 1e9
                tie = abs(scaled - np.floor(scaled) - 0.5) < 1e-3
                change.setdefault(group, []).append((float(np.round(scaled)) / 1e9, tie))

charts = []
for c in page["charts"]:
    ties = 0
    if c["field"] == "word-change":
        pairs = change.get(c["group"], [])
        vals, ties = [v for v, _ in pairs], sum(t for _, t in pairs)
    elif c["field"] == "obscured":
        vals = obscured
    else:
        vals = values.get((int(c["step"]), c["field"]), [])
    vals = np.asarray(vals, dtype=float)
    if c["kind"] == "bins":
        counts = np.histogram(vals, bins=np.asarray(c["edges"], dtype=float))[0].tolist()
    else:
        counts = [int(np.sum(vals == x)) for x in c["values"]]
    amb = int(ties)
    charts.append({"counts": counts, "ambiguous": amb, "total": int(len(vals))})

steps = []
n_steps = max(len(t["origin"]["steps"]) for t in takes)
for i in range(n_steps):
    listed = [t["origin"]["steps"][i] for t in takes if len(t["origin"]["steps"]) > i]
    steps.append({"name": listed[0]["step"], "ran": sum(s["ran"] for s in listed), "listed": len(listed)})

zeros = [t for t in takes if t["origin"]["take"] == 0]
figures = {
    "takes-out": len(takes),
    "clips-with-takes": len(zeros),
    "hours-in": sum(t["origin"]["time_map"]["source"][-1] - t["origin"]["time_map"]["source"][0] for t in zeros) / 3600,
    "hours-out": sum(t["duration"] for t in takes) / 3600,
    "rejects": len(rejects),
    "words": words,
    "obscured-quarter": int(quarter),
    "obscured-half": int(half),
    "valid-takes": sum(valid(t) for t in takes),
}
print(json.dumps({"figures": figures, "steps": steps, "charts": charts}))
