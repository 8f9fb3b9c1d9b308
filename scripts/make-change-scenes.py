#!/usr/bin/env python3
"""Pairs of short scenes (before / after) with known, planted changes, for `census --baseline`.

The invented Wrenhollow Ridge post hears a small band twice. Between the two recordings the
script plants one change of every kind the comparison reports, and keeps some emitters the
same:

  new       an emitter only in the after scene
  gone      an emitter only in the before scene
  moved     the same emitter, its centre shifted by MOVE_HZ
  power     the same emitter, 6 dB stronger
  width     the same emitter, its occupied bandwidth doubled (same power)
  airtime   the same bursty emitter keyed three times as often (bursts of the same length)
  floor     the noise density raised 6 dB over a band where no emitter is
  unchanged a steady carrier and a bursty emitter that stay as they are (their bursts fall
            at new random times, so the after scene is not a copy)

Every emitter is complex Gaussian noise through a linear-phase FIR band-pass (scipy.signal.firwin,
Hann window), so its 99 % occupied bandwidth is the filter's pass band, and its power is set in
the time domain (mean |x|^2 while on the air, Parseval). Roles are dealt to slots at random
(seeded), with centres jittered, so every seed gives another arrangement.

Output (SigMF pairs, ci8 by default, at a low rate so that the files stay small):
  DIR/before.sigmf-meta|data, DIR/after.sigmf-meta|data, DIR/truth.json

truth.json lists each planted change: kind, centre (Hz, absolute; for `moved` the new centre
and the old one), the true level delta (dB) for power and floor, the band for floor, the
factor for width and airtime; and the unchanged emitters' centres.

Usage: python3 scripts/make-change-scenes.py [--seed N] [--out DIR] [--format ci8|ci16_le]
                                              [--seconds S] [--rate HZ]
"""

import argparse
import json
import os
import platform

import numpy as np
import scipy
import scipy.signal

CENTER_HZ = 433.5e6
NOISE_DBFS_PER_HZ = -86.0
MOVE_HZ = 10e3
POWER_DB = 6.0
FLOOR_DB = 6.0
WIDTH_FACTOR = 2.0
AIRTIME_FACTOR = 3
BURST_S = 0.05


def band_noise(rng, n, fs, offset_hz, width_hz, power_dbfs, taps=511):
    """Complex Gaussian noise of `power_dbfs` (mean |x|^2) in a band `width_hz` wide at
    `offset_hz` from the centre."""
    h = scipy.signal.firwin(taps, width_hz / 2, fs=fs, window="hann")
    x = (rng.standard_normal(n + taps) + 1j * rng.standard_normal(n + taps)) / np.sqrt(2)
    y = scipy.signal.lfilter(h, 1.0, x)[taps:]
    y *= np.sqrt(10 ** (power_dbfs / 10) / np.mean(np.abs(y) ** 2))
    t = np.arange(n) / fs
    return y * np.exp(2j * np.pi * offset_hz * t)


def burst_mask(rng, n, fs, count, burst_s):
    """`count` bursts of `burst_s` at random, non-overlapping times (at least one burst apart: 50 ms, twice the census's default hang time),
    away from the ends of the scene."""
    length = int(burst_s * fs)
    slots = np.arange(int(0.05 * fs), n - int(0.05 * fs) - length, 2 * length)
    if count > len(slots):
        raise SystemExit(f"{count} bursts do not fit; make the scene longer")
    starts = rng.choice(slots, size=count, replace=False)
    mask = np.zeros(n)
    for s in starts:
        mask[s:s + length] = 1.0
    return mask


def write_sigmf(path, x, fs, fmt, description):
    scale = {"ci8": 128.0, "ci16_le": 32768.0}[fmt]
    dtype = {"ci8": np.int8, "ci16_le": np.int16}[fmt]
    info = np.iinfo(dtype)
    iq = np.empty(2 * len(x))
    iq[0::2], iq[1::2] = x.real * scale, x.imag * scale
    clipped = int(np.sum((iq > info.max) | (iq < info.min)))
    if clipped:
        raise SystemExit(f"{path}: {clipped} values clip; lower the levels")
    np.round(iq).astype(dtype).tofile(path + ".sigmf-data")
    meta = {
        "global": {
            "core:datatype": fmt,
            "core:sample_rate": fs,
            "core:version": "1.0.0",
            "core:description": description,
        },
        "captures": [{"core:sample_start": 0, "core:frequency": CENTER_HZ,
                      "core:datetime": "2031-04-17T06:30:00Z"}],
        "annotations": [],
    }
    with open(path + ".sigmf-meta", "w") as f:
        json.dump(meta, f, indent=2)


def main():
    p = argparse.ArgumentParser()
    p.add_argument("--seed", type=int, default=1)
    p.add_argument("--out", default="tests/reference/change")
    p.add_argument("--format", default="ci8", choices=["ci8", "ci16_le"])
    p.add_argument("--seconds", type=float, default=5.0)
    p.add_argument("--rate", type=float, default=200e3)
    a = p.parse_args()
    fs, n = a.rate, int(a.seconds * a.rate)
    rng = np.random.default_rng(a.seed)
    os.makedirs(a.out, exist_ok=True)

    # Slots across the span, clear of the centre (the receiver's DC spike) and of the outer 10 %
    # (where filters roll off, common practice). One slot is kept for the floor band, one for the
    # place the moved emitter goes to.
    half = 0.4 * fs
    pitch = 2 * half / 12
    slots = [-half + pitch * (k + 0.5) for k in range(12)]
    slots = [s for s in slots if abs(s) > 0.6 * pitch]
    roles = ["new", "gone", "moved", "power", "width", "airtime", "steady", "bursty", "floor"]
    # The moved emitter needs the slot beside it free (its destination): take neighbouring pairs.
    order = rng.permutation(len(slots) - 1)
    used, place = set(), {}
    for k in order:
        if k not in used and k + 1 not in used and slots[k + 1] - slots[k] < 1.5 * pitch:
            place["moved"] = (slots[k], slots[k + 1])
            used |= {k, k + 1}
            break
    free = [s for k, s in enumerate(slots) if k not in used]
    rest = [r for r in roles if r != "moved"]
    if len(free) < len(rest):
        raise SystemExit("not enough slots")
    picks = rng.permutation(len(free))[:len(rest)]
    for r, k in zip(rest, picks):
        place[r] = free[k]

    def jitter():
        return float(rng.uniform(-1e3, 1e3))

    noise = 10 ** (NOISE_DBFS_PER_HZ / 10) * fs
    before = np.sqrt(noise / 2) * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    after = np.sqrt(noise / 2) * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    truth = {"seed": a.seed, "center_hz": CENTER_HZ, "sample_rate_hz": fs,
             "noise_dbfs_per_hz": NOISE_DBFS_PER_HZ, "changes": [], "unchanged": []}

    def level():
        return float(rng.uniform(-42.0, -34.0))

    def width():
        return float(rng.uniform(2.5e3, 4e3))

    # new / gone: continuous, of clearly different widths (a gone emitter and a new one alike
    # in width and level near each other would be the same emitter moved).
    # The new one stands at least 12 dB above the floor density: a continuous emission only a
    # few dB above it cannot be told from a raised floor (the comparison reads it as one).
    f, w, lv = place["new"] + jitter(), float(rng.uniform(3.5e3, 4.5e3)), level() + 6.0
    after += band_noise(rng, n, fs, f, w, lv)
    truth["changes"].append({"kind": "new", "center_hz": CENTER_HZ + f})
    f, w, lv = place["gone"] + jitter(), float(rng.uniform(1.5e3, 2.0e3)), level()
    before += band_noise(rng, n, fs, f, w, lv)
    truth["changes"].append({"kind": "gone", "center_hz": CENTER_HZ + f})
    # moved: same width and level, centre shifted.
    (f0, f1), w, lv = place["moved"], width(), level()
    j = jitter()
    f0, f1 = f0 + j, f0 + j + MOVE_HZ
    before += band_noise(rng, n, fs, f0, w, lv)
    after += band_noise(rng, n, fs, f1, w, lv)
    truth["changes"].append({"kind": "moved", "center_hz": CENTER_HZ + f1,
                             "before_center_hz": CENTER_HZ + f0})
    # power: +6 dB.
    f, w, lv = place["power"] + jitter(), width(), level() - 3.0
    before += band_noise(rng, n, fs, f, w, lv)
    after += band_noise(rng, n, fs, f, w, lv + POWER_DB)
    truth["changes"].append({"kind": "power", "center_hz": CENTER_HZ + f, "delta_db": POWER_DB})
    # width: doubled at the same power.
    f, w, lv = place["width"] + jitter(), width() * 0.6, level()
    before += band_noise(rng, n, fs, f, w, lv)
    after += band_noise(rng, n, fs, f, w * WIDTH_FACTOR, lv)
    truth["changes"].append({"kind": "width", "center_hz": CENTER_HZ + f,
                             "factor": WIDTH_FACTOR})
    # airtime: bursts of one length, three times as many.
    f, w, lv = place["airtime"] + jitter(), width(), level()
    # 12 emissions before and 36 after: the airtime test's statistic (see the census's
    # airtime_z) is then ln 3 / sqrt(1/12 + 1/36) = 3.3 on average, clear of its 2.576; with
    # fewer emissions a tripling is not beyond chance, and the comparison rightly stays quiet.
    count = 12
    before += band_noise(rng, n, fs, f, w, lv) * burst_mask(rng, n, fs, count, BURST_S)
    after += band_noise(rng, n, fs, f, w, lv) * burst_mask(rng, n, fs, AIRTIME_FACTOR * count,
                                                             BURST_S)
    truth["changes"].append({"kind": "airtime", "center_hz": CENTER_HZ + f,
                             "factor": AIRTIME_FACTOR, "emissions_before": count})
    # floor: +6 dB of noise density over one slot's band, no emitter there.
    f, w = place["floor"], 0.8 * pitch
    extra = 10 ** (NOISE_DBFS_PER_HZ / 10) * (10 ** (FLOOR_DB / 10) - 1) * w
    after += band_noise(rng, n, fs, f, w, 10 * np.log10(extra), taps=1023)
    truth["changes"].append({"kind": "floor", "center_hz": CENTER_HZ + f,
                             "start_hz": CENTER_HZ + f - w / 2, "end_hz": CENTER_HZ + f + w / 2,
                             "delta_db": FLOOR_DB})
    # unchanged: a steady emitter and a bursty one (new burst times after).
    f, w, lv = place["steady"] + jitter(), width(), level()
    before += band_noise(rng, n, fs, f, w, lv)
    after += band_noise(rng, n, fs, f, w, lv)
    truth["unchanged"].append({"center_hz": CENTER_HZ + f, "kind": "steady"})
    f, w, lv = place["bursty"] + jitter(), width(), level()
    count = 16
    before += band_noise(rng, n, fs, f, w, lv) * burst_mask(rng, n, fs, count, BURST_S)
    after += band_noise(rng, n, fs, f, w, lv) * burst_mask(rng, n, fs, count, BURST_S)
    truth["unchanged"].append({"center_hz": CENTER_HZ + f, "kind": "bursty"})

    desc = "Wrenhollow Ridge change scene (invented), seed {}, {}".format
    write_sigmf(os.path.join(a.out, "before"), before, fs, a.format, desc(a.seed, "before"))
    write_sigmf(os.path.join(a.out, "after"), after, fs, a.format, desc(a.seed, "after"))
    with open(os.path.join(a.out, "truth.json"), "w") as f:
        json.dump(truth, f, indent=2)
    with open(os.path.join(a.out, "VERSIONS.txt"), "w") as f:
        f.write(f"python {platform.python_version()}, numpy {np.__version__}, "
                f"scipy {scipy.__version__}\n"
                f"python3 scripts/make-change-scenes.py --seed {a.seed} --format {a.format} "
                f"--seconds {a.seconds} --rate {a.rate}\n")


if __name__ == "__main__":
    main()
