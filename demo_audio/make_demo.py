#!/usr/bin/env python3
"""Generate the retake demo set: the Fjellvik cold store.

How to run (from the repository root):

    .venv/bin/python demo_audio/make_demo.py            # regenerate everything, then verify
    .venv/bin/python demo_audio/make_demo.py --check    # only verify the committed files

Needs numpy, scipy and soundfile (all in the project venv) and the espeak-ng
command (Debian package `espeak-ng`).

What it makes, inside the folder this script lives in:

    clips/*.wav|flac|ogg   short headset clips of invented pickers calling out commands
    noise/compressor/      refrigeration compressor hum (50 Hz and harmonics, slow wobble)
    noise/fans/            evaporator fan: broadband air noise with a blade-pass tone
    noise/beeper/          forklift reversing beeper (~1 kHz, 0.5 s on / 0.5 s off) over motor rumble
    manifest.jsonl         one clip per line, in the retake input-manifest schema

Everything is invented: the site, the people, the sentences. Speech is synthesized
by espeak-ng and noise is generated procedurally; no recorded material is used.

Word timings are ground truth from synthesis, not from an aligner. Every word is
synthesized on its own, resampled to the clip's rate, trimmed of its leading and
trailing silence, and pasted into a silent track at a known sample index. The word's
`start` is that index divided by the rate and its `end` is (index + length) / rate,
so each word span is exact to the sample. Line start/end are the first word's start and
the last word's end. The room tone added afterwards is a constant low-level bed that does
not move any word. (The Ogg Vorbis clip is lossy, so its samples differ slightly from the
track that was encoded, but the positions are the same.)

Re-running reproduces the same files byte for byte given the same espeak-ng, libsndfile
and numpy versions: all randomness comes from one fixed seed, the Ogg stream serial
number (which libsndfile picks from the clock) is rewritten to a constant, and float
WAVs are not used (libsndfile stamps those with the time).
"""

import argparse
import json
import math
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np
import soundfile as sf
from scipy.signal import butter, resample_poly, sosfilt

SEED = 46_2023
SITE = "fjellvik-cold-store"
ROOT = Path(__file__).resolve().parent
ESPEAK = shutil.which("espeak-ng") or "/usr/bin/espeak-ng"

# --------------------------------------------------------------------------------------
# Invented people and their synthetic voices (espeak-ng voice+variant, words/min, pitch 0-99)
# --------------------------------------------------------------------------------------
SPEAKERS = {
    "astrid": dict(voice="en+f3", speed=182, pitch=58, gain=0.62),
    "jonas": dict(voice="en-us+m3", speed=170, pitch=40, gain=0.70),
    "kalani": dict(voice="en-gb-scotland+f2", speed=190, pitch=66, gain=0.58),
    "ruben": dict(voice="en-029+m1", speed=162, pitch=34, gain=0.66),
}

# --------------------------------------------------------------------------------------
# Invented call-outs, numbers spelled as spoken so every word is one synthesized token
# --------------------------------------------------------------------------------------
S = {
    "a14": "aisle fourteen bay three confirm",
    "p2dock": "pallet two ready for dock",
    "cd57": "check digit five seven",
    "pick6": "pick six cases from slot twelve",
    "short41": "short pick on location forty one",
    "door2": "freezer door two is open",
    "reefer4": "reefer trailer at dock four",
    "temp22": "chamber temperature minus twenty two",
    "skip": "skip location empty slot",
    "scan9": "scan label on pallet nine",
    "damaged8": "damaged carton in aisle eight",
    "repl7": "replenish bay seven level two",
    "repeat": "repeat last location",
    "qty11": "confirm quantity eleven",
    "cd30": "check digit three zero",
    "move20": "moving to aisle twenty",
    "batch": "batch complete going to dock one",
    "reverse6": "forklift reversing in aisle six",
    "blast": "blast freezer door closed",
    "next9": "next pick aisle nine bay one",
    "wrapped": "pallet wrapped and labelled",
    "dock3full": "dock three trailer full",
    "wrong": "wrong item put back",
    "temp18": "temperature check done minus eighteen",
    "ready": "ready for next order",
    "copy": "fjellvik control copy that",
    "stop12": "stop pick on aisle twelve",
    "hold5": "hold pallet five for quality",
}

# --------------------------------------------------------------------------------------
# Clips: id, container/subtype, rate, channels, zone, [(speaker, sentence key), ...]
# --------------------------------------------------------------------------------------
CLIPS = [
    dict(id="pick-a-001", fmt="WAV", subtype="PCM_16", rate=16000, zone="freezer-aisles",
         lines=[("astrid", "a14"), ("astrid", "cd57"), ("astrid", "next9")]),
    dict(id="pick-b-001", fmt="WAV", subtype="PCM_16", rate=16000, zone="freezer-aisles",
         lines=[("jonas", "pick6"), ("jonas", "cd30"), ("jonas", "qty11")]),
    dict(id="pick-c-001", fmt="WAV", subtype="PCM_24", rate=16000, zone="chill-chamber",
         lines=[("kalani", "skip"), ("kalani", "wrong")]),
    dict(id="control-001", fmt="WAV", subtype="PCM_16", rate=16000, zone="freezer-aisles",
         lines=[("astrid", "door2"), ("ruben", "copy"), ("astrid", "blast")]),
    dict(id="pick-d-001", fmt="WAV", subtype="PCM_16", rate=16000, zone="freezer-aisles",
         channels=2, channel_gains=(1.0, 0.72),
         lines=[("jonas", "damaged8"), ("jonas", "stop12")]),
    dict(id="dock-001", fmt="WAV", subtype="PCM_16", rate=44100, zone="dock",
         lines=[("ruben", "reefer4")]),
    dict(id="dock-002", fmt="WAV", subtype="PCM_16", rate=48000, zone="dock",
         lines=[("kalani", "batch")]),
    dict(id="pick-a-002", fmt="FLAC", subtype="PCM_16", rate=16000, zone="blast-freezer",
         lines=[("astrid", "temp22"), ("astrid", "temp18"), ("astrid", "move20")]),
    dict(id="pick-c-002", fmt="OGG", subtype="VORBIS", rate=22050, zone="chill-chamber",
         lines=[("kalani", "scan9"), ("kalani", "repl7"), ("kalani", "repeat")]),
    dict(id="dock-003", fmt="WAV", subtype="PCM_16", rate=16000, zone="dock",
         untimed=True,
         lines=[("jonas", "p2dock"), ("ruben", "hold5")]),
]
# Sentences not used above (dock3full, short41, reverse6, wrapped, ready) are spares for tests and examples.

EXT = {"WAV": "wav", "FLAC": "flac", "OGG": "ogg"}

ROOM_TONE_DBFS = -45.0     # RMS of the site bed under the speech
TRIM_DB = -35.0            # word trim threshold on a 5 ms RMS envelope, re the word's peak
WORD_GAP_S = (0.06, 0.20)  # pause between words of a line
LINE_GAP_S = (0.40, 0.75)  # pause between lines
EDGE_S = (0.20, 0.40)      # silence before the first and after the last line
FADE_S = 0.004             # raised-cosine fade inside each trimmed word (no clicks)


# ======================================================================================
# speech
# ======================================================================================
class WordSynth:
    """espeak-ng, one word at a time, cached per (voice, speed, pitch, word)."""

    def __init__(self, workdir: Path):
        self.workdir = workdir
        self.cache = {}

    def raw(self, word, voice, speed, pitch):
        key = (word, voice, speed, pitch)
        if key not in self.cache:
            path = self.workdir / f"w{len(self.cache):04d}.wav"
            subprocess.run([ESPEAK, "-v", voice, "-s", str(speed), "-p", str(pitch),
                            "-w", str(path), word], check=True, capture_output=True)
            x, sr = sf.read(str(path), dtype="float64", always_2d=False)
            if x.ndim > 1:
                x = x.mean(axis=1)
            self.cache[key] = (x, sr)
        return self.cache[key]

    def word(self, word, voice, speed, pitch, rate):
        """The word at `rate`, trimmed of leading/trailing silence, with short fades."""
        x, sr = self.raw(word, voice, speed, pitch)
        if sr != rate:
            g = math.gcd(rate, sr)
            x = resample_poly(x, rate // g, sr // g)
        lo, hi = trim_bounds(x, rate)
        y = x[lo:hi].copy()
        nf = min(int(round(FADE_S * rate)), len(y) // 4)
        if nf > 0:
            ramp = 0.5 - 0.5 * np.cos(np.pi * (np.arange(nf) + 0.5) / nf)
            y[:nf] *= ramp
            y[-nf:] *= ramp[::-1]
        return y


def trim_bounds(x, rate):
    """[lo, hi) of the part of x whose 5 ms RMS envelope is within TRIM_DB of its peak."""
    win = max(1, int(round(0.005 * rate)))
    env = np.sqrt(np.convolve(x * x, np.ones(win) / win, mode="same"))
    thr = env.max() * 10 ** (TRIM_DB / 20)
    idx = np.flatnonzero(env > thr)
    if idx.size == 0:
        raise RuntimeError("espeak-ng produced a silent word")
    half = win // 2
    return max(0, idx[0] - half), min(len(x), idx[-1] + half + 1)


def build_speech(clip, synth, rng):
    """Silent track with words pasted at known sample positions. Returns (track, lines)."""
    rate = clip["rate"]
    pieces = []  # (sample index, samples)
    lines = []
    pos = int(round(rng.uniform(*EDGE_S) * rate))
    for li, (spk, key) in enumerate(clip["lines"]):
        v = SPEAKERS[spk]
        # a little take-to-take variation within a speaker
        speed = v["speed"] + int(rng.integers(-6, 7))
        pitch = v["pitch"] + int(rng.integers(-4, 5))
        if li > 0:
            pos += int(round(rng.uniform(*LINE_GAP_S) * rate))
        words = []
        for wi, w in enumerate(S[key].split()):
            if wi > 0:
                pos += int(round(rng.uniform(*WORD_GAP_S) * rate))
            y = synth.word(w, v["voice"], speed, pitch, rate) * v["gain"]
            pieces.append((pos, y))
            words.append(dict(start_n=pos, end_n=pos + len(y), text=w))
            pos += len(y)
        lines.append(dict(speaker=spk, text=S[key], words=words))
    total = pos + int(round(rng.uniform(*EDGE_S) * rate))
    track = np.zeros(total)
    for p, y in pieces:
        track[p:p + len(y)] += y
    return track, lines


# ======================================================================================
# noise helpers
# ======================================================================================
def rms(x):
    return float(np.sqrt(np.mean(np.square(x, dtype=np.float64))))


def db(x):
    return 20 * math.log10(max(x, 1e-12))


def set_rms(x, dbfs):
    return x * (10 ** (dbfs / 20) / max(rms(x), 1e-12))


def coloured(rng, n, slope_db_per_oct):
    """Gaussian noise with a power slope (0 white, -3 pink, -6 brown), unit RMS."""
    spec = np.fft.rfft(rng.standard_normal(n))
    f = np.fft.rfftfreq(n)
    f[0] = f[1]
    spec *= f ** (slope_db_per_oct / (20 * math.log10(2)))
    y = np.fft.irfft(spec, n)
    return y / rms(y)


def band(x, rate, lo=None, hi=None, order=4):
    if lo and hi:
        sos = butter(order, [lo, hi], btype="bandpass", fs=rate, output="sos")
    elif hi:
        sos = butter(order, hi, btype="lowpass", fs=rate, output="sos")
    else:
        sos = butter(order, lo, btype="highpass", fs=rate, output="sos")
    return sosfilt(sos, x)


def harmonic_hum(rng, n, rate, f0, amps, wobble_hz, wobble_depth, drift=0.0):
    """Sum of harmonics of f0 (amps[k] for harmonic k+1) with a slow amplitude wobble."""
    t = np.arange(n) / rate
    # slow random frequency drift (a few tenths of a percent), integrated to phase
    wander = 1.0 + drift * np.interp(t, np.linspace(0, t[-1], 8), rng.uniform(-1, 1, 8))
    phase0 = 2 * np.pi * np.cumsum(f0 * wander) / rate
    y = np.zeros(n)
    for k, a in enumerate(amps, start=1):
        y += a * np.sin(k * phase0 + rng.uniform(0, 2 * np.pi))
    wob = 1 + wobble_depth * np.sin(2 * np.pi * wobble_hz * t + rng.uniform(0, 2 * np.pi))
    return y * wob


def room_tone(rng, n, rate):
    """Low-level site bed: distant compressor hum plus soft air noise, at ROOM_TONE_DBFS."""
    hum = harmonic_hum(rng, n, rate, 50.0, [1.0, 0.55, 0.35, 0.22, 0.12, 0.08],
                       wobble_hz=0.17, wobble_depth=0.12, drift=0.002)
    air = band(coloured(rng, n, -3.0), rate, lo=60, hi=min(3000, 0.45 * rate), order=2)
    return set_rms(set_rms(hum, 0) + 0.8 * set_rms(air, 0), ROOM_TONE_DBFS)


# ======================================================================================
# noise bank (16 kHz mono)
# ======================================================================================
NOISE_RATE = 16000


def noise_compressor(rng, secs):
    n, r = int(secs * NOISE_RATE), NOISE_RATE
    t = np.arange(n) / r
    hum = harmonic_hum(rng, n, r, 50.0,
                       [1.0, 0.8, 0.55, 0.45, 0.3, 0.25, 0.18, 0.12, 0.1, 0.07, 0.05, 0.04],
                       wobble_hz=0.21, wobble_depth=0.18, drift=0.003)
    # mechanical chatter: band noise pulsed at the shaft rate (~24.3 Hz)
    shaft = 0.5 + 0.5 * np.sin(2 * np.pi * 24.3 * t) ** 8
    chatter = band(coloured(rng, n, -1.5), r, lo=250, hi=2500, order=2) * shaft
    floor = band(coloured(rng, n, -4.5), r, lo=30, hi=700, order=2)
    y = set_rms(hum, 0) + 0.35 * set_rms(chatter, 0) + 0.4 * set_rms(floor, 0)
    return set_rms(y, -22.0)


def noise_fans(rng, secs):
    n, r = int(secs * NOISE_RATE), NOISE_RATE
    air = band(coloured(rng, n, -2.0), r, lo=70, hi=5000, order=2)
    # two evaporator fans at slightly different speeds: 5 blades at ~1410 and ~1425 rpm
    bpf1 = harmonic_hum(rng, n, r, 5 * 1410 / 60, [1.0, 0.35, 0.12], 0.09, 0.2, drift=0.004)
    bpf2 = harmonic_hum(rng, n, r, 5 * 1425 / 60, [0.7, 0.25, 0.08], 0.13, 0.2, drift=0.004)
    y = set_rms(air, 0) + 0.3 * set_rms(bpf1 + bpf2, 0)
    return set_rms(y, -24.0)


def noise_beeper(rng, secs):
    n, r = int(secs * NOISE_RATE), NOISE_RATE
    t = np.arange(n) / r
    f = 1030.0
    tone = np.sin(2 * np.pi * f * t) + 0.18 * np.sin(2 * np.pi * 3 * f * t + 0.7)
    on = ((t + 0.2) % 1.0) < 0.5  # 0.5 s on, 0.5 s off, first beep at 0.3 s
    ramp_n = int(0.008 * r)
    gate = np.convolve(on.astype(float), np.ones(ramp_n) / ramp_n, mode="same")
    # the truck backs past: level rises and falls slowly
    approach = 0.55 + 0.45 * np.sin(np.pi * np.clip(t / secs, 0, 1)) ** 1.5
    beep = tone * gate * approach
    # electric traction motor: brown rumble plus a faint whine that follows speed
    rumble = band(coloured(rng, n, -6.0), r, lo=20, hi=350, order=2)
    whine = harmonic_hum(rng, n, r, 310.0, [1.0, 0.4], 0.05, 0.3, drift=0.02)
    motor = set_rms(rumble, 0) + 0.15 * set_rms(whine, 0)
    y = set_rms(beep, -17.0) + set_rms(motor, -31.0)
    return y


NOISES = [
    ("compressor", "compressor-plantroom.wav", noise_compressor, 10.0),
    ("fans", "evaporator-fans-chamber2.wav", noise_fans, 10.0),
    ("beeper", "forklift-reversing-dock.wav", noise_beeper, 10.0),
]


# ======================================================================================
# writing
# ======================================================================================
def _ogg_crc_table():
    table = []
    for i in range(256):
        c = i << 24
        for _ in range(8):
            c = ((c << 1) ^ 0x04C11DB7) if c & 0x80000000 else (c << 1)
        table.append(c & 0xFFFFFFFF)
    return table


_OGG_CRC = _ogg_crc_table()


def ogg_fix_serial(path: Path, serial=0x464A5631):
    """libsndfile seeds the Ogg stream serial from the clock: set a constant, fix CRCs."""
    data = bytearray(path.read_bytes())
    i = 0
    while i < len(data):
        if data[i:i + 4] != b"OggS":
            raise RuntimeError(f"{path}: not an Ogg page at byte {i}")
        nseg = data[i + 26]
        body = sum(data[i + 27:i + 27 + nseg])
        end = i + 27 + nseg + body
        data[i + 14:i + 18] = serial.to_bytes(4, "little")
        data[i + 22:i + 26] = b"\0\0\0\0"
        crc = 0
        for b in data[i:end]:
            crc = ((crc << 8) & 0xFFFFFFFF) ^ _OGG_CRC[((crc >> 24) ^ b) & 0xFF]
        data[i + 22:i + 26] = crc.to_bytes(4, "little")
        i = end
    path.write_bytes(bytes(data))


def write_audio(path: Path, x, rate, fmt, subtype):
    path.parent.mkdir(parents=True, exist_ok=True)
    sf.write(str(path), x, rate, format=fmt, subtype=subtype)
    if fmt == "OGG":
        ogg_fix_serial(path)


def check_written(path: Path, x, subtype):
    """The file decodes to the track we built: same length, no shift, tiny error."""
    y, _ = sf.read(str(path), dtype="float64", always_2d=True)
    x = x.reshape(len(x), -1)
    if y.shape != x.shape:
        raise RuntimeError(f"{path}: decoded shape {y.shape}, built {x.shape}")
    if subtype == "VORBIS":  # lossy: demand only that the best alignment is lag 0
        a, b = x[:, 0], y[:, 0]
        lags = range(-32, 33)
        score = [np.dot(a[max(0, k):len(a) + min(0, k)], b[max(0, -k):len(b) + min(0, -k)])
                 for k in lags]
        lag = list(lags)[int(np.argmax(score))]
        snr = db(rms(a)) - db(rms(a - b))
        if lag != 0 or snr < 15:
            raise RuntimeError(f"{path}: Vorbis round trip lag {lag}, SNR {snr:.1f} dB")
    else:
        lsb = {"PCM_16": 2.0 ** -15, "PCM_24": 2.0 ** -23}[subtype]
        err = float(np.max(np.abs(x - y)))
        if err > lsb:
            raise RuntimeError(f"{path}: round trip error {err} > 1 LSB")


def seconds(n, rate):
    return round(n / rate, 6)


def generate(out: Path):
    (out / "clips").mkdir(parents=True, exist_ok=True)
    records = []
    with tempfile.TemporaryDirectory(prefix="retake-demo-words-") as tmp:
        synth = WordSynth(Path(tmp))
        for ci, clip in enumerate(CLIPS):
            rng = np.random.default_rng([SEED, ci])
            rate = clip["rate"]
            speech, lines = build_speech(clip, synth, rng)
            gains = clip.get("channel_gains", (1.0,))
            chans = [g * speech + room_tone(rng, len(speech), rate) for g in gains]
            x = np.stack(chans, axis=1) if len(chans) > 1 else chans[0]
            peak = float(np.max(np.abs(x)))
            if peak > 0.97:  # clipping guard (not expected with the gains above)
                x *= 0.97 / peak
            rel = f"clips/{clip['id']}.{EXT[clip['fmt']]}"
            write_audio(out / rel, x, rate, clip["fmt"], clip["subtype"])
            check_written(out / rel, x, clip["subtype"])

            rec = {"id": clip["id"], "audio": rel, "site": SITE, "zone": clip["zone"]}
            if clip.get("untimed"):
                rec["text"] = " ".join(l["text"] for l in lines)
            else:
                rec["lines"] = []
                for l in lines:
                    ws = [{"start": seconds(w["start_n"], rate), "end": seconds(w["end_n"], rate),
                           "text": w["text"]} for w in l["words"]]
                    rec["lines"].append({"start": ws[0]["start"], "end": ws[-1]["end"],
                                         "text": l["text"], "speaker": l["speaker"],
                                         "words": ws})
            records.append(rec)

    with open(out / "manifest.jsonl", "w", encoding="utf-8", newline="\n") as f:
        for rec in records:
            f.write(json.dumps(rec, ensure_ascii=False) + "\n")

    for ni, (cat, name, fn, secs) in enumerate(NOISES):
        rng = np.random.default_rng([SEED, 1000 + ni])
        y = fn(rng, secs)
        peak = float(np.max(np.abs(y)))
        if peak > 0.89:
            y *= 0.89 / peak
        write_audio(out / "noise" / cat / name, y, NOISE_RATE, "WAV", "PCM_16")


# ======================================================================================
# verification
# ======================================================================================
MIN_MARGIN_DB = 15.0  # every word's RMS must exceed the gap RMS by this much


def verify(out: Path):
    problems = []
    rows = []
    manifest = out / "manifest.jsonl"
    with open(manifest, encoding="utf-8") as f:
        records = [json.loads(l) for l in f if l.strip()]
    for rec in records:
        where = f"{rec.get('id')}"
        info = sf.info(str(out / rec["audio"]))
        x, rate = sf.read(str(out / rec["audio"]), dtype="float64", always_2d=True)
        dur = x.shape[0] / rate
        mono = x.mean(axis=1)
        if "lines" not in rec:
            if not isinstance(rec.get("text"), str) or not rec["text"]:
                problems.append(f"{where}: neither lines nor text")
            rows.append((rec["id"], info.format, info.subtype, rate, x.shape[1], dur,
                         "-", len(rec["text"].split()), None, db(rms(mono)), None, "untimed"))
            continue
        mask = np.zeros(len(mono), bool)
        word_db = []
        prev_end = 0.0
        nwords = 0
        for li, line in enumerate(rec["lines"]):
            lw = f"{where} line {li}"
            if not (0 <= line["start"] < line["end"] <= dur):
                problems.append(f"{lw}: span {line['start']}..{line['end']} not inside 0..{dur}")
            if line["start"] < prev_end:
                problems.append(f"{lw}: starts before the previous line ends")
            ws = line["words"]
            if abs(line["start"] - ws[0]["start"]) > 1e-9 or abs(line["end"] - ws[-1]["end"]) > 1e-9:
                problems.append(f"{lw}: line span is not first word start .. last word end")
            if line["text"] != " ".join(w["text"] for w in ws):
                problems.append(f"{lw}: line text differs from its words")
            wprev = line["start"]
            for wi, w in enumerate(ws):
                ww = f"{lw} word {wi} ({w['text']})"
                if not (line["start"] <= w["start"] < w["end"] <= line["end"]):
                    problems.append(f"{ww}: not inside its line")
                if w["start"] < wprev:
                    problems.append(f"{ww}: out of order or overlapping")
                wprev = w["end"]
                a, b = int(round(w["start"] * rate)), int(round(w["end"] * rate))
                mask[a:b] = True
                word_db.append((db(rms(mono[a:b])), w["text"]))
                nwords += 1
            prev_end = line["end"]
        gap_db = db(rms(mono[~mask]))
        worst, worst_word = min(word_db)
        margin = worst - gap_db
        status = "ok" if margin >= MIN_MARGIN_DB else "LOW"
        if status != "ok":
            problems.append(f"{where}: word '{worst_word}' only {margin:.1f} dB above the gaps")
        rows.append((rec["id"], info.format, info.subtype, rate, x.shape[1], dur,
                     len(rec["lines"]), nwords, worst, gap_db, margin, status))

    print(f"{'clip':<12} {'format':<6} {'subtype':<7} {'rate':>6} {'ch':>2} {'dur s':>6} "
          f"{'lines':>5} {'words':>5} {'min word dBFS':>13} {'gaps dBFS':>9} {'margin dB':>9}  status")
    for r in rows:
        mw = f"{r[8]:13.1f}" if r[8] is not None else f"{'-':>13}"
        mg = f"{r[10]:9.1f}" if r[10] is not None else f"{'-':>9}"
        print(f"{r[0]:<12} {r[1]:<6} {r[2]:<7} {r[3]:>6} {r[4]:>2} {r[5]:6.2f} "
              f"{r[6]:>5} {r[7]:>5} {mw} {r[9]:9.1f} {mg}  {r[11]}")

    print()
    for p in sorted((out / "noise").rglob("*.wav")):
        info = sf.info(str(p))
        y, _ = sf.read(str(p), dtype="float64")
        if info.samplerate != NOISE_RATE or info.channels != 1:
            problems.append(f"{p}: expected {NOISE_RATE} Hz mono")
        print(f"noise {str(p.relative_to(out)):<48} {info.samplerate} Hz {info.channels} ch "
              f"{info.duration:5.1f} s  RMS {db(rms(y)):6.1f} dBFS  peak {db(float(np.abs(y).max())):5.1f} dBFS")

    total = sum(p.stat().st_size for p in out.rglob("*") if p.is_file()
                and "__pycache__" not in p.parts)
    print(f"\ntotal size of {out.name}/: {total / 1e6:.2f} MB")
    if total >= 4_000_000:
        problems.append(f"total size {total} bytes is not under 4 MB")
    if problems:
        print("\nPROBLEMS:")
        for p in problems:
            print("  " + p)
        return False
    print("all checks passed")
    return True


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--out", type=Path, default=ROOT,
                    help="folder to write into (default: the folder of this script)")
    ap.add_argument("--check", action="store_true", help="only verify existing files")
    args = ap.parse_args()
    if not args.check:
        generate(args.out)
    sys.exit(0 if verify(args.out) else 1)


if __name__ == "__main__":
    main()
