#!/usr/bin/env python3
"""Writes the scenes that tests/classify.rs checks the modulation classifier against.

Run it from anywhere (it writes next to itself, under ../tests/reference/classify):

    python3 scripts/make-class-scenes.py

Every scene is one emission of a known kind with known parameters, moved off the centre of the
band, in complex white Gaussian noise set so that the SNR *in the emission's 99 % occupied
bandwidth* (ITU-R SM.328) is 10, 20 or 30 dB. There are two sets drawn with different seeds and
different parameter draws:

- "seen":   the classifier's thresholds were tuned while looking at these;
- "unseen": evaluated only at the end, to report how the tuned classifier generalises.

Files (all under tests/reference/classify/):

- <set>-<kind>-<snr>db.ci16   interleaved little-endian int16 I/Q, value / 32768 = full scale
                              (SigMF ci16_le), 16 000 samples at 100 kS/s (0.16 s);
- truth.json                  for every file: kind, class, SNR, rate, offset, the 99 % OBW of the
                              clean emission, the noise PSD (|x|^2 per Hz) and the parameters;
- VERSIONS.txt                python, numpy and scipy versions, the command and the seeds.

The generator is seeded; the same numpy and scipy write the same files.
"""

import json
import os
import platform
import sys

import numpy as np
import scipy
import scipy.signal

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), os.pardir, "tests", "reference",
                   "classify")
FS = 100_000.0
N = 16_000
SNRS = [10, 20, 30]
SETS = {"seen": 20261204, "unseen": 77031}
# Another set and directory for a one-off check, e.g. CLASS_SCENES="fresh:5150" CLASS_SCENES_OUT=/tmp/x
if os.environ.get("CLASS_SCENES"):
    SETS = {k: int(v) for k, v in (p.split(":") for p in os.environ["CLASS_SCENES"].split(","))}
    OUT = os.environ.get("CLASS_SCENES_OUT", OUT)
# Mean power of every emission (dBFS). QAM and OFDM peaks stay well inside full scale.
LEVEL_DBFS = -16.0
SCALE = 32768.0


def shaped(symbols, rate_hz, alpha, rng):
    """Symbols through an RRC filter at a symbol rate that is not a whole fraction of FS: each
    symbol's pulse is placed at its exact time (k / rate) on the sample grid."""
    sps = FS / rate_hz
    span = 8
    x = np.zeros(N, dtype=complex)
    t0 = rng.uniform(0, sps)
    n = np.arange(N)
    for k, a in enumerate(symbols):
        centre = t0 + (k - span) * sps
        lo = int(np.floor(centre - span * sps))
        hi = int(np.ceil(centre + span * sps))
        if hi < 0 or lo >= N:
            continue
        lo, hi = max(lo, 0), min(hi, N - 1)
        tt = (n[lo:hi + 1] - centre) / sps
        x[lo:hi + 1] += a * rrc_pulse(tt, alpha)
    return x


def rrc_pulse(t, alpha):
    """Root-raised-cosine pulse at times t in symbols (closed form, common practice); the
    singular points t = 0 and |t| = 1/(4 alpha) take their limits."""
    t = np.asarray(t, dtype=float)
    at0 = np.abs(t) < 1e-8
    sing = np.abs(np.abs(t) - 1.0 / (4 * alpha)) < 1e-8
    ts = np.where(at0 | sing, 0.5, t)
    out = (np.sin(np.pi * ts * (1 - alpha)) + 4 * alpha * ts * np.cos(np.pi * ts * (1 + alpha))) / (
        np.pi * ts * (1 - (4 * alpha * ts) ** 2))
    out = np.where(at0, 1.0 - alpha + 4 * alpha / np.pi, out)
    lim = (alpha / np.sqrt(2)) * ((1 + 2 / np.pi) * np.sin(np.pi / (4 * alpha))
                                  + (1 - 2 / np.pi) * np.cos(np.pi / (4 * alpha)))
    return np.where(sing, lim, out)


def n_symbols(rate_hz):
    return int(N / FS * rate_hz) + 20


def psk(rng, order, rate_hz, alpha):
    k = rng.integers(0, order, n_symbols(rate_hz))
    sym = np.exp(1j * (2 * np.pi * k / order + (np.pi / 4 if order == 4 else 0.0)))
    return shaped(sym, rate_hz, alpha, rng)


def qam(rng, order, rate_hz, alpha):
    m = int(round(np.sqrt(order)))
    levels = np.arange(-(m - 1), m, 2, dtype=float)
    sym = rng.choice(levels, n_symbols(rate_hz)) + 1j * rng.choice(levels, n_symbols(rate_hz))
    return shaped(sym, rate_hz, alpha, rng)


def cpfsk(rng, tones, rate_hz, shift_hz):
    """Continuous-phase FSK with rectangular (unshaped) frequency pulses: adjacent tones `shift_hz`
    apart, symmetric about the carrier."""
    sym = rng.integers(0, tones, n_symbols(rate_hz))
    freq = (sym - (tones - 1) / 2.0) * shift_hz
    t0 = rng.uniform(0, FS / rate_hz)
    idx = np.floor((np.arange(N) + t0) * rate_hz / FS).astype(int)
    f = freq[idx]
    phase = 2 * np.pi * np.cumsum(f) / FS
    return np.exp(1j * phase)


def fm(rng, dev_hz, tones_hz):
    t = np.arange(N) / FS
    msg = sum(a * np.sin(2 * np.pi * f * t + rng.uniform(0, 2 * np.pi)) for f, a in tones_hz)
    msg = msg / np.max(np.abs(msg))  # the peak deviation is exactly dev_hz
    phase = 2 * np.pi * dev_hz * np.cumsum(msg) / FS
    return np.exp(1j * phase)


def am(rng, depth, tone_hz):
    t = np.arange(N) / FS
    return 1.0 + depth * np.cos(2 * np.pi * tone_hz * t + rng.uniform(0, 2 * np.pi)) + 0j


def ofdm(rng, fft, spacing_hz, active, cp, up, down):
    """OFDM: `active` QPSK/16QAM subcarriers (DC unused) of an `fft`-point IFFT at fft*spacing_hz,
    a cyclic prefix of `cp` samples, then resampled by up/down to FS (scipy.signal.resample_poly).
    Useful symbol length 1 / spacing_hz (van de Beek et al. 1997)."""
    base = fft * spacing_hz
    assert abs(base * up / down - FS) < 1e-6
    n_base = int(N * down / up) + 4 * (fft + cp)
    used = np.concatenate([np.arange(1, active // 2 + 1), np.arange(fft - active // 2, fft)])
    out = []
    levels = np.array([-3.0, -1.0, 1.0, 3.0])
    while sum(len(s) for s in out) < n_base:
        X = np.zeros(fft, dtype=complex)
        X[used] = rng.choice(levels, len(used)) + 1j * rng.choice(levels, len(used))
        s = np.fft.ifft(X)
        out.append(np.concatenate([s[-cp:], s]))
    x = np.concatenate(out)
    y = scipy.signal.resample_poly(x, up, down)
    start = rng.integers(0, fft)
    return y[start:start + N]


def pulses(rng, width_s, pri_s, edge_s):
    """Unmodulated carrier pulses, 50 %-amplitude width `width_s`, raised-cosine edges of
    `edge_s`, one every `pri_s`."""
    t = np.arange(N) / FS
    first = rng.uniform(0, pri_s)
    env = np.zeros(N)
    k = 0
    while first + k * pri_s < t[-1] + pri_s:
        start = first + k * pri_s
        rel = t - start
        rise = np.clip((rel + edge_s / 2) / edge_s, 0, 1)
        fall = np.clip((width_s + edge_s / 2 - rel) / edge_s, 0, 1)
        env = np.maximum(env, 0.5 - 0.5 * np.cos(np.pi * np.minimum(rise, fall)))
        k += 1
    return env + 0j


def gmsk(rng, rate_hz, bt):
    """GMSK: MSK whose rectangular frequency pulses pass a Gaussian filter of bandwidth-time
    product `bt` (3 dB bandwidth bt * rate; sigma = sqrt(ln 2) / (2 pi bt) symbols, common
    practice), so the phase still moves by +-pi/2 per bit: shift rate / 2."""
    sym = rng.integers(0, 2, n_symbols(rate_hz)) * 2 - 1
    t0 = rng.uniform(0, FS / rate_hz)
    sps = FS / rate_hz
    pad = int(4 * sps)
    idx = np.floor((np.arange(-pad, N + pad) + t0) * rate_hz / FS).astype(int) % len(sym)
    f = sym[idx] * rate_hz / 4.0
    tt = np.arange(-2 * int(sps), 2 * int(sps) + 1) / sps
    sigma = np.sqrt(np.log(2)) / (2 * np.pi * bt)
    h = np.exp(-tt ** 2 / (2 * sigma ** 2))
    f = np.convolve(f, h / h.sum(), mode="same")[pad:pad + N]
    return np.exp(2j * np.pi * np.cumsum(f) / FS)


def keyed(x, on_from, on_to):
    """x keyed on (hard, as cheap transmitters key) for the share [on_from, on_to) of the
    record and off elsewhere: a burst taken with some silence either side."""
    g = np.zeros(N)
    g[int(on_from * N):int(on_to * N)] = 1.0
    return x * g


def unfiltered_psk(rng, order, rate_hz):
    """PSK with rectangular (unshaped) symbols at `rate_hz` (any, not a fraction of FS)."""
    k = rng.integers(0, order, n_symbols(rate_hz))
    sym = np.exp(1j * (2 * np.pi * k / order + (np.pi / 4 if order == 4 else 0.0)))
    t0 = rng.uniform(0, FS / rate_hz)
    idx = np.floor((np.arange(N) + t0) * rate_hz / FS).astype(int)
    return sym[idx]


def am_tones(rng, depth, tones_hz):
    """Full-carrier AM by a sum of tones of random phases, scaled so that its *peak* is
    `depth`: the envelope's largest excursion from the carrier is depth times the carrier."""
    t = np.arange(N) / FS
    m = sum(np.sin(2 * np.pi * f * t + rng.uniform(0, 2 * np.pi)) for f in tones_hz)
    return 1.0 + depth * m / np.max(np.abs(m)) + 0j


def band_noise(rng, bw_hz):
    sos = scipy.signal.butter(8, bw_hz / 2, fs=FS, output="sos")
    w = rng.standard_normal(N + 4000) + 1j * rng.standard_normal(N + 4000)
    return scipy.signal.sosfilt(sos, w)[4000:]


def obw99(x):
    """99 % occupied bandwidth (ITU-R SM.328, beta = 1 %) from a Welch PSD with a 1024-point Hann
    window (RBW about 146 Hz at 100 kS/s), as a monitoring receiver would measure it."""
    f, p = scipy.signal.welch(x, FS, window="hann", nperseg=1024, noverlap=512,
                              return_onesided=False, scaling="density", detrend=False)
    order = np.argsort(f)
    f, p = f[order], p[order]
    c = np.cumsum(p)
    c = c / c[-1]
    lo = np.interp(0.005, c, f)
    hi = np.interp(0.995, c, f)
    return float(hi - lo), float((hi + lo) / 2)


def draw_kinds(rng, set_name):
    """Parameters for each kind in one set (different draws per set)."""
    u = lambda a, b: float(rng.uniform(a, b))
    unseen = set_name != "seen"
    alpha = (lambda: u(0.25, 0.45)) if unseen else (lambda: 0.35)
    kinds = []
    kinds.append(("cw", "cw", {}, lambda r: np.ones(N, dtype=complex)))
    depth, tone = u(0.3, 0.9), u(300, 2000)
    kinds.append(("am", "am", {"mod_depth": depth}, lambda r, d=depth, t=tone: am(r, d, t)))
    dev = u(1500, 5000)
    fm_tones = [(u(300, 2500), 1.0), (u(300, 2500), u(0.3, 0.8)), (u(300, 2500), u(0.2, 0.5))]
    kinds.append(("fm", "fm", {"deviation_hz": dev}, lambda r, d=dev, t=fm_tones: fm(r, d, t)))
    rate, h = u(1000, 4000), u(1.0, 2.0)
    kinds.append(("fsk2", "fsk", {"symbol_rate_hz": rate, "tones": 2, "shift_hz": h * rate},
                  lambda r, a=rate, s=h * rate: cpfsk(r, 2, a, s)))
    rate, h = u(1000, 3000), u(0.8, 1.5)
    kinds.append(("fsk4", "fsk", {"symbol_rate_hz": rate, "tones": 4, "shift_hz": h * rate},
                  lambda r, a=rate, s=h * rate: cpfsk(r, 4, a, s)))
    for order in (2, 4, 8):
        rate, al = u(4000, 12000), alpha()
        kinds.append((f"psk{order}", "psk",
                      {"symbol_rate_hz": rate, "psk_order": order, "rrc_alpha": al},
                      lambda r, o=order, a=rate, al=al: psk(r, o, a, al)))
    for order in (16, 64):
        rate, al = u(4000, 12000), alpha()
        kinds.append((f"qam{order}", "qam",
                      {"symbol_rate_hz": rate, "qam_order": order, "rrc_alpha": al},
                      lambda r, o=order, a=rate, al=al: qam(r, o, a, al)))
    if unseen:
        cfg = dict(fft=128, spacing_hz=625.0, active=96, cp=16, up=5, down=4)
    else:
        cfg = dict(fft=64, spacing_hz=1000.0, active=48, cp=16, up=25, down=16)
    kinds.append(("ofdm", "ofdm", {"subcarrier_spacing_hz": cfg["spacing_hz"], "fft": cfg["fft"],
                                   "cp": cfg["cp"], "active": cfg["active"]},
                  lambda r, c=cfg: ofdm(r, **c)))
    width, pri = u(100e-6, 300e-6), u(1.5e-3, 4e-3)
    kinds.append(("pulsed", "pulsed", {"pulse_width_s": width, "pri_s": pri},
                  lambda r, w=width, p=pri: pulses(r, w, p, 10e-6)))
    bw = u(8000, 30000)
    kinds.append(("noise", "noise", {"filter_bandwidth_hz": bw}, lambda r, b=bw: band_noise(r, b)))
    return kinds


def draw_more_kinds(rng):
    """Kinds added later, drawn from a generator of their own (seed + 1) so the scenes above
    stay as they were: MSK (continuous-phase 2-FSK of index 1/2, shift = rate / 2), AM by
    several tones (depth = the peak depth), unfiltered QPSK keyed on for part of the
    record (its symbol rate must come from the burst, not from its edges) and GMSK."""
    u = lambda a, b: float(rng.uniform(a, b))
    kinds = []
    rate = u(2000, 6000)
    kinds.append(("msk", "fsk", {"symbol_rate_hz": rate, "tones": 2, "shift_hz": rate / 2},
                  lambda r, a=rate: cpfsk(r, 2, a, a / 2)))
    depth = u(0.4, 0.95)
    tones = sorted(u(300, 2700) for _ in range(int(rng.integers(2, 6))))
    kinds.append(("am-tones", "am", {"mod_depth": depth, "tones_hz": tones},
                  lambda r, d=depth, t=tones: am_tones(r, d, t)))
    rate, start = u(2000, 3500), u(0.05, 0.2)
    kinds.append(("psk4-burst", "psk", {"symbol_rate_hz": rate, "psk_order": 4,
                                        "keyed_share": [start, start + 0.7]},
                  lambda r, a=rate, b=start: keyed(unfiltered_psk(r, 4, a), b, b + 0.7)))
    rate, bt = u(2000, 6000), u(0.3, 0.5)
    kinds.append(("gmsk", "fsk", {"symbol_rate_hz": rate, "tones": 2, "shift_hz": rate / 2,
                                  "bt": bt},
                  lambda r, a=rate, b=bt: gmsk(r, a, b)))
    return kinds


def main():
    os.makedirs(OUT, exist_ok=True)
    scenes = []
    for set_name, seed in SETS.items():
        rng = np.random.default_rng(seed)
        scenes += write_set(rng, set_name, draw_kinds(rng, set_name))
        more = np.random.default_rng(seed + 1)
        scenes += write_set(more, set_name, draw_more_kinds(more))
    finish(scenes)


def write_set(rng, set_name, kinds):
    """Writes every kind at every SNR; returns their truth entries."""
    scenes = []
    if True:
        for kind, cls, params, make in kinds:
            for snr in SNRS:
                s = make(rng)
                # Power while keyed on, for the keyed kinds; else over the record (pulses too).
                on = np.abs(s) > 0 if "keyed_share" in params else np.ones(N, dtype=bool)
                s = s * np.sqrt(10 ** (LEVEL_DBFS / 10) / np.mean(np.abs(s[on]) ** 2))
                obw, centre = obw99(s)
                margin = FS / 2 - obw / 2 - 3000
                offset = float(rng.uniform(-margin, margin)) if margin > 0 else 0.0
                t = np.arange(N) / FS
                s = s * np.exp(2j * np.pi * offset * t)
                power = float(np.mean(np.abs(s[on]) ** 2))
                noise_psd = power / (obw * 10 ** (snr / 10))
                sigma = np.sqrt(noise_psd * FS / 2)
                x = s + sigma * (rng.standard_normal(N) + 1j * rng.standard_normal(N))
                iq = np.empty(2 * N, dtype="<i2")
                iq[0::2] = np.clip(np.round(x.real * SCALE), -32768, 32767)
                iq[1::2] = np.clip(np.round(x.imag * SCALE), -32768, 32767)
                name = f"{set_name}-{kind}-{snr}db.ci16"
                iq.tofile(os.path.join(OUT, name))
                scenes.append({
                    "file": name, "set": set_name, "kind": kind, "class": cls, "snr_db": snr,
                    "rate_hz": FS, "samples": N, "offset_hz": offset + centre, "obw_hz": obw,
                    "noise_psd": noise_psd, "signal_power": power, "params": params,
                })
    return scenes


def finish(scenes):
    with open(os.path.join(OUT, "truth.json"), "w") as f:
        json.dump({"format": "ci16_le", "scale": SCALE, "scenes": scenes}, f, indent=1)
    with open(os.path.join(OUT, "VERSIONS.txt"), "w") as f:
        f.write(f"python {platform.python_version()}\nnumpy {np.__version__}\n"
                f"scipy {scipy.__version__}\ncommand: python3 scripts/make-class-scenes.py\n"
                f"seeds: {SETS} (and each + 1 for the kinds added later)\n")
    print(f"wrote {len(scenes)} scenes to {OUT}", file=sys.stderr)


if __name__ == "__main__":
    main()
