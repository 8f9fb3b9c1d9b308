#!/usr/bin/env python3
"""Writes the reference vectors that tests/accuracy.rs compares bandwarden against.

Run it (from anywhere; it writes next to itself, under ../tests/reference):

    python3 scripts/make-reference.py

Everything lands in tests/reference/:

- signal-<name>.cf32     the input samples, interleaved little-endian float32 I/Q (SigMF cf32_le);
- psd-<name>.f64         scipy.signal.welch PSDs of that signal (fftshifted, float64 little
                         endian), one block per (window, nperseg, noverlap) case, concatenated;
- reference.json         the index of the PSD blocks, the signal parameters, window figures
                         (scipy.signal.get_window), scipy.special.jv / i0 / gammainc /
                         gammaincinv values;
- VERSIONS.txt           python, numpy and scipy versions and the command that wrote the files.

The reference PSDs are computed in float64 from the float32 samples as stored, so any difference
the tests see comes from bandwarden's arithmetic, not from rounding of the inputs. The generator is
seeded, so rerunning with the same numpy gives the same files.
"""

import json
import os
import platform
import sys

import numpy as np
import scipy
import scipy.signal
import scipy.special

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), os.pardir, "tests", "reference")
FS = 1.0e6
LEN = 12000  # not a multiple of any hop below: welch and bandwarden must both drop the tail
SEED = 20240611

# (scipy get_window argument, bandwarden --window name)
WINDOWS = [
    ("boxcar", "rect"),
    ("hann", "hann"),
    ("hamming", "hamming"),
    ("blackman", "blackman"),
    ("blackmanharris", "blackman-harris"),
    ("flattop", "flattop"),
    (("kaiser", 9.0), "kaiser:9"),
]

# (nperseg, noverlap): a power of two, an even non-power of two, and an odd length.
SEGMENTS = [(1024, 512), (1000, 750), (625, 375)]


def tone(n, freq_hz, level_dbfs, phase=0.0):
    amp = 10.0 ** (level_dbfs / 20.0)
    t = np.arange(n) / FS
    return amp * np.exp(1j * (2 * np.pi * freq_hz * t + phase))


def noise(rng, n, power_dbfs):
    sigma = np.sqrt(10.0 ** (power_dbfs / 10.0) / 2.0)
    return sigma * (rng.standard_normal(n) + 1j * rng.standard_normal(n))


def make_signals(rng):
    """The test inputs and the parameters a reader needs to understand them."""
    signals = {}

    signals["white"] = (
        noise(rng, LEN, -20.0),
        {"what": "complex white Gaussian noise", "power_dbfs": -20.0},
    )

    tones = [(123456.7, -10.0), (-234567.8, -30.0)]
    x = noise(rng, LEN, -70.0)
    for f, lvl in tones:
        x = x + tone(LEN, f, lvl, phase=rng.uniform(0, 2 * np.pi))
    signals["tones"] = (
        x,
        {"what": "two tones at sub-bin offsets in white noise", "tones_hz_dbfs": tones,
         "noise_power_dbfs": -70.0},
    )

    # Coloured noise: a 6th-order Butterworth low-pass (cut-off 0.15 fs) moved up by 0.2 fs, over
    # a white floor 90 dB down; the PSD spans a wide dynamic range with steep skirts.
    b, a = scipy.signal.butter(6, 0.3)  # cut-off as a fraction of Nyquist: 0.15 fs
    shaped = scipy.signal.lfilter(b, a, noise(rng, LEN + 2000, -10.0))[2000:]
    shaped = shaped * np.exp(2j * np.pi * 0.2 * np.arange(LEN)) + noise(rng, LEN, -100.0)
    signals["shaped"] = (
        shaped,
        {"what": "Butterworth-shaped noise (order 6, cut-off 0.15 fs, shifted +0.2 fs) "
                 "over white noise at -100 dBFS"},
    )

    fc, fm, beta = 50000.0, 9765.625, 2.4
    n = np.arange(LEN)
    fm_sig = 10 ** (-3.0 / 20) * np.exp(
        1j * (2 * np.pi * fc * n / FS + beta * np.sin(2 * np.pi * fm * n / FS)))
    signals["fm"] = (
        fm_sig + noise(rng, LEN, -80.0),
        {"what": "sinusoidal FM carrier, -3 dBFS, in white noise at -80 dBFS",
         "carrier_hz": fc, "modulation_hz": fm, "beta": beta},
    )
    return signals


def write_cf32(path, x):
    iq = np.empty(2 * len(x), dtype="<f4")
    iq[0::2] = x.real
    iq[1::2] = x.imag
    iq.tofile(path)
    return iq[0::2].astype(np.float64) + 1j * iq[1::2].astype(np.float64)


def welch_cases(name, x):
    """All (window, size) PSDs of one signal, as index entries and one float64 array."""
    entries, blocks, offset = [], [], 0
    for scipy_win, ours in WINDOWS:
        for nperseg, noverlap in SEGMENTS:
            _, pxx = scipy.signal.welch(
                x, fs=FS, window=scipy_win, nperseg=nperseg, noverlap=noverlap,
                return_onesided=False, scaling="density", detrend=False, average="mean")
            pxx = np.fft.fftshift(pxx).astype("<f8")
            step = nperseg - noverlap
            entries.append({
                "window": ours, "scipy_window": scipy_win if isinstance(scipy_win, str)
                else list(scipy_win), "nperseg": nperseg, "noverlap": noverlap,
                "segments": (len(x) - noverlap) // step, "offset": offset, "len": nperseg})
            blocks.append(pxx)
            offset += nperseg
    return entries, np.concatenate(blocks)


def window_figures():
    """S1, S2, ENBW, coherent gain, scalloping and highest side lobe, computed numerically."""
    out = []
    kinds = WINDOWS + [(("kaiser", 3 * np.pi), "kaiser:%r" % (3 * np.pi))]
    for scipy_win, ours in kinds:
        for n in (16, 17, 1000, 1024):
            w = scipy.signal.get_window(scipy_win, n)  # periodic (DFT-even) by default
            s1, s2 = w.sum(), (w * w).sum()
            half = np.abs(np.sum(w * np.exp(-1j * np.pi * np.arange(n) / n))) / s1
            # Response on a 1/64-bin grid out to 40 bins (or n/2). The main lobe ends at the
            # first minimum past the half-power point (a flat-top ripples before that); the
            # highest side lobe is the maximum beyond it.
            pad = 64 * n
            r = np.abs(np.fft.fft(w, pad))[: min(pad // 2, 40 * 64) + 1] / s1
            k = int(np.argmax(r < 2 ** -0.5))
            while k < len(r) - 1 and r[k + 1] <= r[k]:
                k += 1
            sidelobe = 20 * np.log10(max(r[k:].max(), 1e-12))
            entry = {
                "window": ours, "n": n, "s1": s1, "s2": s2, "enbw_bins": n * s2 / s1 ** 2,
                "coherent_gain": s1 / n, "scalloping_db": -20 * np.log10(half),
                "highest_sidelobe_db": sidelobe}
            if n <= 17:
                entry["coefficients"] = w.tolist()
            out.append(entry)
    return out


def special_values():
    jv = []
    for beta in (2.4, 5.0):
        jv.append({"beta": beta, "orders": list(range(0, 31)),
                   "values": [scipy.special.jv(k, beta) for k in range(0, 31)]})
    i0 = [{"x": x, "value": scipy.special.i0(x)}
          for x in (0.0, 0.5, 1.0, 2.0, 5.0, 3 * np.pi, 9.0, 14.0, 20.0, 35.0, 50.0)]
    gammainc = []
    for a in (0.5, 1.0, 1.5, 2.0, 7.5, 15.0, 31.0, 100.0, 640.0):
        for x_over_a in (0.01, 0.1, 0.5, 0.9, 1.0, 1.1, 2.0, 5.0, 12.0):
            x = a * x_over_a
            gammainc.append({"a": a, "x": x, "p": scipy.special.gammainc(a, x)})
    # Quantiles of a unit-mean Gamma(a): gammaincinv(a, q) / a.
    quantiles = []
    for a in (0.5, 1.0, 2.0, 15.0, 100.0):
        for q in (0.001, 0.025, 0.25, 0.5, 0.975, 0.99, 0.999):
            quantiles.append({"a": a, "q": q, "value": scipy.special.gammaincinv(a, q) / a})
    return {"jv": jv, "i0": i0, "gammainc": gammainc, "gamma_quantile_unit_mean": quantiles}


def main():
    os.makedirs(OUT, exist_ok=True)
    rng = np.random.default_rng(SEED)
    index = {"sample_rate_hz": FS, "samples": LEN, "signals": []}
    for name, (x, params) in make_signals(rng).items():
        stored = write_cf32(os.path.join(OUT, f"signal-{name}.cf32"), x)
        entries, psd = welch_cases(name, stored)
        psd.tofile(os.path.join(OUT, f"psd-{name}.f64"))
        index["signals"].append({
            "name": name, "samples_file": f"signal-{name}.cf32", "psd_file": f"psd-{name}.f64",
            "params": params, "mean_power": float(np.mean(np.abs(stored) ** 2)),
            "psd": entries})
    index["windows"] = window_figures()
    index["special"] = special_values()
    with open(os.path.join(OUT, "reference.json"), "w") as f:
        json.dump(index, f, indent=1, default=float)
        f.write("\n")
    with open(os.path.join(OUT, "VERSIONS.txt"), "w") as f:
        f.write(f"python {platform.python_version()}\n")
        f.write(f"numpy {np.__version__}\n")
        f.write(f"scipy {scipy.__version__}\n")
        f.write("command: python3 scripts/make-reference.py\n")
        f.write(f"seed: {SEED}\n")


if __name__ == "__main__":
    sys.exit(main())
