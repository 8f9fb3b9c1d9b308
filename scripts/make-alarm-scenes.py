#!/usr/bin/env python3
"""Writes the change-alarm scene of tests/reference/alarms/ (seeded, numpy only).

An invented quiet hilltop at Wrenhollow Ridge, 200 s of complex baseband at 8 kS/s, ci8
(interleaved int8 I/Q, full scale 128), with three 1 kHz channels:

- hut   (-2.5 kHz): no emission ever; from 70 s to 130 s its noise floor is 6 dB higher
                   (band-limited noise of three times the background density added: +6.02 dB),
                   the interference case;
- mast  (+1.5 kHz): keyed carrier bursts 20 dB over the channel's noise, busy about 15 % of the
                   time, about 55 % from 90 s to 150 s;
- shed  (-0.5 kHz): the same bursts at about 15 % all along (unchanged: must stay silent).

truth.json records the steps. Run from the repository root:
    python3 scripts/make-alarm-scenes.py
"""
import json
import os

import numpy as np

SEED = 20310417
RATE = 8000.0
SECONDS = 200
NOISE_DBFS = -30.0  # total background noise power over the 8 kHz span
OUT = os.path.join("tests", "reference", "alarms")

CHANNELS = {"hut": -2500.0, "mast": 1500.0, "shed": -500.0}
WIDTH = 1000.0
FLOOR_STEP = (70.0, 130.0, 6.0)  # start, end, dB (hut)
BUSY_STEP = (90.0, 150.0, 0.15, 0.55)  # start, end, duty before/after, duty during (mast)
BURST_S = 0.2  # mean burst length


def keyed(rng, n, duty_at):
    """On/off keying with exponential burst and gap lengths; duty_at(t) sets the mean duty."""
    key = np.zeros(n, dtype=bool)
    i = int(rng.exponential(1.0) * RATE)
    while i < n:
        on = max(1, int(rng.exponential(BURST_S) * RATE))
        key[i:i + on] = True
        i += on
        d = duty_at(i / RATE)
        i += max(1, int(rng.exponential(BURST_S * (1.0 - d) / d) * RATE))
    return key


def main():
    rng = np.random.default_rng(SEED)
    n = int(SECONDS * RATE)
    t = np.arange(n) / RATE
    p_noise = 10 ** (NOISE_DBFS / 10)
    x = np.sqrt(p_noise / 2) * (rng.standard_normal(n) + 1j * rng.standard_normal(n))

    # hut: three times the background density within the channel, for the step only.
    a, b, db = FLOOR_STEP
    extra = np.sqrt(p_noise / 2 * (10 ** (db / 10) - 1)) * (
        rng.standard_normal(n) + 1j * rng.standard_normal(n))
    spec = np.fft.fft(extra)
    f = np.fft.fftfreq(n, 1 / RATE)
    spec[np.abs(f - CHANNELS["hut"]) > 0.5 * WIDTH] = 0.0
    extra = np.fft.ifft(spec)
    x += np.where((t >= a) & (t < b), extra, 0.0)

    # bursts 20 dB over the channel's noise (the noise in 1 kHz is 9 dB under the span's).
    level = 10 ** ((NOISE_DBFS - 10 * np.log10(RATE / WIDTH) + 20.0) / 20)
    s0, s1, d_usual, d_busy = BUSY_STEP
    for name, duty in [("mast", lambda u: d_busy if s0 <= u < s1 else d_usual),
                       ("shed", lambda u: d_usual)]:
        key = keyed(rng, n, duty)
        phase = rng.uniform(0, 2 * np.pi)
        x += key * level * np.exp(1j * (2 * np.pi * CHANNELS[name] * t + phase))

    iq = np.empty(2 * n, dtype=np.int8)
    iq[0::2] = np.clip(np.round(x.real * 128), -128, 127)
    iq[1::2] = np.clip(np.round(x.imag * 128), -128, 127)
    os.makedirs(OUT, exist_ok=True)
    iq.tofile(os.path.join(OUT, "hilltop.ci8"))
    with open(os.path.join(OUT, "plan.toml"), "w") as fh:
        fh.write("# Wrenhollow Ridge hilltop (invented): the channels of hilltop.ci8\n")
        for name, off in CHANNELS.items():
            fh.write(f'\n[[channel]]\nname = "{name}"\ncenter = "{433.5e6 + off:.0f}"\n'
                     f'width = "{WIDTH:.0f}"\n')
    truth = {
        "file": "hilltop.ci8", "format": "ci8", "sample_rate_hz": RATE,
        "center_hz": 433.5e6, "start": "2031-04-17T06:00:00Z", "seconds": SECONDS,
        "seed": SEED, "numpy": np.__version__,
        "steps": [
            {"channel": "hut", "what": "floor_up", "start_s": a, "end_s": b, "delta_db": db},
            {"channel": "mast", "what": "busier", "start_s": s0, "end_s": s1,
             "duty_before": d_usual, "duty_during": d_busy},
        ],
        "unchanged": ["shed"],
    }
    with open(os.path.join(OUT, "truth.json"), "w") as fh:
        json.dump(truth, fh, indent=1)
        fh.write("\n")


if __name__ == "__main__":
    main()
