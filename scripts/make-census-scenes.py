#!/usr/bin/env python3
"""Writes the census scenes that tests/census_scenes.rs counts rows on, with their truth.

Run it from anywhere (it writes next to itself, under ../tests/reference/census):

    python3 scripts/make-census-scenes.py

Every scene is a short ci8 recording (interleaved signed 8-bit I/Q, x/128 full scale, the SigMF
`ci8` datatype) at a low rate, centred on 0 Hz, plus one `truth.json` listing, per scene, its
rate, length and emitters: nominal centre, the 99 % occupied bandwidth (ITU-R SM.328) of the
emitter's own noiseless samples by scipy.signal.welch, its mean power while keyed and its keying
intervals. Keying is rectangular (hard on/off), as cheap transmitters key, so that every keyed
emitter has switching transients; filters are left out where the trade often leaves them out
(unfiltered OFDM, unshaped FSK, rectangular pulses), so that out-of-band skirts are present.

Single-emitter scenes have 30 dB SNR: the noise density is set so that the noise power inside
the emitter's 99 % OBW is 30 dB under the emitter's mean power while keyed (the noise floor is
never put below about one ci8 step, so quantisation stays white). The generator is seeded; the
same numpy writes the same files.
"""

import json
import os
import platform
import sys

import numpy as np
import scipy
import scipy.signal

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), os.pardir, "tests", "reference",
                   "census")
SEED = 20261204
# Other random draws into another folder, for a one-off check that the committed ones are not a
# lucky draw: CENSUS_SCENES_SEED=5150 CENSUS_SCENES_OUT=/tmp/c python3 scripts/make-census-scenes.py,
# then CENSUS_DIR=/tmp/c cargo test --test census_scenes.
if os.environ.get("CENSUS_SCENES_SEED"):
    SEED = int(os.environ["CENSUS_SCENES_SEED"])
    OUT = os.environ.get("CENSUS_SCENES_OUT", OUT)
SNR_DB = 30.0
# Below this total noise power (dBFS) the ci8 quantisation (one step is 1/128, about -50 dBFS
# of complex power) would no longer be covered by the noise.
MIN_NOISE_DBFS = -45.0


def welch_obw(x, fs, frac=0.99):
    """99 % occupied bandwidth of x (ITU-R SM.328: 0.5 % of the power below, 0.5 % above) and
    the middle of that band, from scipy.signal.welch (Hann, 4096, two-sided)."""
    f, p = scipy.signal.welch(x, fs, window="hann", nperseg=min(4096, len(x)),
                              return_onesided=False, scaling="density", detrend=False)
    f, p = np.fft.fftshift(f), np.fft.fftshift(p)
    c = np.cumsum(p)
    c /= c[-1]
    lo = f[np.searchsorted(c, (1 - frac) / 2)]
    hi = f[np.searchsorted(c, 1 - (1 - frac) / 2)]
    df = f[1] - f[0]
    return float(hi - lo + df), float((hi + lo) / 2)


def gate(n, fs, intervals):
    """A 0/1 envelope on [start, end) seconds of each interval."""
    g = np.zeros(n)
    for a, b in intervals:
        g[int(round(a * fs)):int(round(b * fs))] = 1.0
    return g


def periodic(start, on, period, count):
    return [(start + k * period, start + k * period + on) for k in range(count)]


def tone(n, fs, f):
    return np.exp(2j * np.pi * f * np.arange(n) / fs)


def cpfsk(rng, n, fs, fc, baud, shift, tones):
    """Continuous-phase FSK with rectangular (unshaped) frequency pulses, `tones` levels spaced
    `shift` apart about fc, random symbols."""
    sps = fs / baud
    syms = rng.integers(0, tones, int(n / sps) + 2)
    levels = (syms - (tones - 1) / 2) * shift
    f = fc + levels[(np.arange(n) / sps).astype(int)]
    return np.exp(2j * np.pi * np.cumsum(f) / fs)


def linear(rng, n, fs, fc, baud, points, rolloff=None):
    """Linear modulation (PSK/QAM) of random symbols from `points`, rectangular pulses or a
    root-raised-cosine of `rolloff` (sampled over 8 symbols), unit mean power."""
    sps = int(round(fs / baud))
    syms = points[rng.integers(0, len(points), n // sps + 16)]
    if rolloff is None:
        x = np.repeat(syms, sps)[:n]
    else:
        t = (np.arange(-4 * sps, 4 * sps + 1)) / sps
        b = rolloff
        with np.errstate(divide="ignore", invalid="ignore"):
            h = (np.sin(np.pi * t * (1 - b)) + 4 * b * t * np.cos(np.pi * t * (1 + b))) / (
                np.pi * t * (1 - (4 * b * t) ** 2))
        h[t == 0] = 1 - b + 4 * b / np.pi
        edge = np.isclose(np.abs(t), 1 / (4 * b))
        h[edge] = b / np.sqrt(2) * ((1 + 2 / np.pi) * np.sin(np.pi / (4 * b))
                                    + (1 - 2 / np.pi) * np.cos(np.pi / (4 * b)))
        up = np.zeros(len(syms) * sps, complex)
        up[::sps] = syms
        x = np.convolve(up, h)[4 * sps:4 * sps + n]
    x = x / np.sqrt(np.mean(np.abs(x) ** 2))
    return x * tone(n, fs, fc)


def ofdm(rng, n, fs, fc, spacing, carriers, cp):
    """Unfiltered OFDM: QPSK on `carriers` subcarriers either side of fc (fc's own left empty),
    `spacing` apart, useful symbol 1/spacing, cyclic prefix `cp` of it."""
    nu = int(round(fs / spacing))
    ncp = int(round(cp * nu))
    out = []
    while sum(len(s) for s in out) < n:
        spec = np.zeros(nu, complex)
        k = np.r_[-carriers:0, 1:carriers + 1] % nu
        spec[k] = (rng.choice([-1, 1], len(k)) + 1j * rng.choice([-1, 1], len(k))) / np.sqrt(2)
        s = np.fft.ifft(spec) * nu
        out.append(np.r_[s[-ncp:], s])
    x = np.concatenate(out)[:n]
    x = x / np.sqrt(np.mean(np.abs(x) ** 2))
    return x * tone(n, fs, fc)


def band_noise(rng, n, fs, lo, hi):
    """Noise confined to [lo, hi) Hz by zeroing the other bins of the record's DFT, unit power."""
    x = np.fft.fft(rng.standard_normal(n) + 1j * rng.standard_normal(n))
    f = np.fft.fftfreq(n, 1 / fs)
    x[(f < lo) | (f >= hi)] = 0
    x = np.fft.ifft(x)
    return x / np.sqrt(np.mean(np.abs(x) ** 2))


def fm(n, fs, fc, fm_hz, beta):
    t = np.arange(n) / fs
    return np.exp(1j * (2 * np.pi * fc * t + beta * np.sin(2 * np.pi * fm_hz * t)))


def am(rng, n, fs, fc, depth):
    """Full-carrier AM by a sum of five tones between 300 Hz and 2.7 kHz (a voice-like band),
    scaled to a peak of `depth`."""
    t = np.arange(n) / fs
    m = sum(np.sin(2 * np.pi * f * t + rng.uniform(0, 2 * np.pi))
            for f in (310.0, 730.0, 1190.0, 1870.0, 2650.0))
    m = depth * m / np.max(np.abs(m))
    return (1 + m) * tone(n, fs, fc)


class Scene:
    def __init__(self, name, fs, seconds, what):
        self.name, self.fs, self.what = name, fs, what
        self.n = int(fs * seconds)
        self.clean = np.zeros(self.n, complex)
        self.emitters = []

    def add(self, what, x, centre, level_dbfs, keying=None):
        """Adds emitter x (unit power while on) at `level_dbfs` while keyed, keyed on
        `keying` (None: always on)."""
        g = np.ones(self.n) if keying is None else gate(self.n, self.fs, keying)
        y = x * 10 ** (level_dbfs / 20) * g
        self.clean += y
        width, middle = welch_obw(y, self.fs)
        on = g > 0
        power = 10 * np.log10(np.mean(np.abs(y[on]) ** 2))
        self.emitters.append({
            "what": what,
            "centre_hz": centre,
            "width_hz": round(width, 1),
            "obw_middle_hz": round(middle, 1),
            "power_dbfs": round(float(power), 2),
            "keying_s": ([[0.0, self.n / self.fs]] if keying is None
                         else [[round(a, 6), round(b, 6)] for a, b in keying]),
        })
        return y

    def write(self, rng, noise_dbfs_per_hz):
        total = noise_dbfs_per_hz + 10 * np.log10(self.fs)
        total = max(total, MIN_NOISE_DBFS)
        p = 10 ** (total / 10)
        x = self.clean + np.sqrt(p / 2) * (rng.standard_normal(self.n)
                                           + 1j * rng.standard_normal(self.n))
        iq = np.empty(2 * self.n)
        iq[0::2], iq[1::2] = x.real * 128, x.imag * 128
        peak = np.max(np.abs(iq))
        assert peak < 127, f"{self.name}: clipped ({peak:.0f})"
        np.clip(np.round(iq), -128, 127).astype(np.int8).tofile(
            os.path.join(OUT, self.name + ".ci8"))
        return {
            "file": self.name + ".ci8",
            "format": "ci8",
            "rate_hz": self.fs,
            "seconds": self.n / self.fs,
            "what": self.what,
            "noise_dbfs_per_hz": round(float(total - 10 * np.log10(self.fs)), 2),
            "emitters": self.emitters,
        }


def single(rng, name, what, x, centre, level, fs, seconds, keying=None):
    """A one-emitter scene at 30 dB SNR in its 99 % OBW."""
    s = Scene(name, fs, seconds, what)
    s.add(what, x, centre, level, keying)
    e = s.emitters[0]
    noise = e["power_dbfs"] - SNR_DB - 10 * np.log10(max(e["width_hz"], 1000.0))
    return s.write(rng, noise)


def main():
    os.makedirs(OUT, exist_ok=True)
    rng = np.random.default_rng(SEED)
    scenes = []
    fs, secs = 250e3, 0.6
    n = int(fs * secs)

    # Single emitters. Levels keep the peaks of each inside ci8's range.
    scenes.append(single(rng, "ofdm", "unfiltered OFDM, 48 QPSK subcarriers 1 kHz apart, CP 1/4",
                         ofdm(rng, n, fs, 20e3, 1e3, 24, 0.25), 20e3, -16.0, fs, secs))
    pfs = 500e3
    pn = int(pfs * secs)
    pulses = gate(pn, pfs, periodic(0.0, 50e-6, 2e-3, int(secs / 2e-3)))
    scenes.append(single(rng, "pulse-train", "50 us rectangular pulses every 2 ms",
                         pulses * tone(pn, pfs, 30e3) / np.sqrt(np.mean(pulses)), 30e3, -22.0,
                         pfs, secs))
    scenes.append(single(rng, "fsk4", "unshaped continuous-phase 4-FSK, 2400 Bd, 2400 Hz shift",
                         cpfsk(rng, n, fs, -15e3, 2400, 2400, 4), -15e3, -8.0, fs, secs))
    scenes.append(single(rng, "keyed-fm", "FM, 1 kHz tone, beta 2.5, keyed 150 ms of 250 ms",
                         fm(n, fs, 25e3, 1e3, 2.5), 25e3, -8.0, fs, secs,
                         periodic(0.05, 0.15, 0.25, 2)))
    qpsk = np.array([1, 1j, -1, -1j]) * np.exp(1j * np.pi / 4)
    scenes.append(single(rng, "qpsk-bursts", "unfiltered QPSK, 10 kBd, 60 ms bursts every 150 ms",
                         linear(rng, n, fs, -30e3, 10e3, qpsk), -30e3, -10.0, fs, secs,
                         periodic(0.04, 0.06, 0.15, 4)))
    qam = np.array([a + 1j * b for a in (-3, -1, 1, 3) for b in (-3, -1, 1, 3)])
    scenes.append(single(rng, "qam16", "16QAM, 20 kBd, root-raised-cosine 0.35, steady",
                         linear(rng, n, fs, 10e3, 20e3, qam, 0.35), 10e3, -18.0, fs, secs))
    scenes.append(single(rng, "am", "full-carrier AM, voice-band tones, depth 0.8",
                         am(rng, n, fs, -40e3, 0.8), -40e3, -14.0, fs, secs))
    scenes.append(single(rng, "cw", "steady unmodulated carrier", tone(n, fs, 12.5e3), 12.5e3,
                         -10.0, fs, secs))
    scenes.append(single(rng, "keyed-cw", "hard-keyed carrier, 40 ms marks every 100 ms",
                         tone(n, fs, -22e3), -22e3, -8.0, fs, secs,
                         periodic(0.03, 0.04, 0.1, 5)))
    scenes.append(single(rng, "wide-bursts", "40 kHz flat noise bursts, 40 ms every 120 ms",
                         band_noise(rng, n, fs, 20e3, 60e3), 40e3, -14.0, fs, secs,
                         periodic(0.05, 0.04, 0.12, 4)))
    bpsk = np.array([1.0, -1.0])
    scenes.append(single(rng, "bpsk", "unfiltered BPSK, 5 kBd, steady",
                         linear(rng, n, fs, -5e3, 5e3, bpsk), -5e3, -10.0, fs, secs))
    scenes.append(single(rng, "msk-bursts", "MSK, 4800 bit/s, 50 ms bursts every 200 ms",
                         cpfsk(rng, n, fs, 50e3, 4800, 2400, 2), 50e3, -8.0, fs, secs,
                         periodic(0.05, 0.05, 0.2, 3)))

    # Two emitters of comparable level keyed at the same instants, 40 kHz apart.
    s = Scene("keyed-together", fs, secs, "two carriers keyed at the same instants, 40 kHz apart")
    both = periodic(0.05, 0.08, 0.18, 3)
    s.add("carrier A", tone(n, fs, -20e3), -20e3, -10.0, both)
    s.add("carrier B", fm(n, fs, 20e3, 1e3, 1.5), 20e3, -13.0, both)
    scenes.append(s.write(rng, -95.0))

    # A keyed band: six emitters, hard-keyed, strong, at 500 kS/s for 3 s.
    bfs, bsecs = 500e3, 3.0
    bn = int(bfs * bsecs)
    s = Scene("keyed-band", bfs, bsecs, "six emitters: keyed FM, FSK bursts, 40 kHz wide bursts, "
              "a 150 kHz link, two carriers")
    s.add("keyed FM", fm(bn, bfs, -120e3, 1e3, 2.5), -120e3, -14.0,
          periodic(0.1, 0.3, 0.5, 5))
    s.add("FSK bursts", cpfsk(rng, bn, bfs, -60e3, 2400, 1200, 2), -60e3, -16.0,
          periodic(0.05, 0.08, 0.25, 11))
    s.add("wide bursts", band_noise(rng, bn, bfs, -220e3, -180e3), -200e3, -20.0,
          periodic(0.2, 0.04, 0.4, 7))
    s.add("150 kHz link", band_noise(rng, bn, bfs, 60e3, 210e3), 135e3, -22.0)
    s.add("carrier", tone(bn, bfs, -20e3), -20e3, -24.0)
    s.add("weak carrier", tone(bn, bfs, 230e3), 230e3, -40.0)
    scenes.append(s.write(rng, -105.0))

    with open(os.path.join(OUT, "truth.json"), "w") as f:
        json.dump({"seed": SEED, "snr_db": SNR_DB, "scenes": scenes}, f, indent=1)
        f.write("\n")
    with open(os.path.join(OUT, "VERSIONS.txt"), "w") as f:
        f.write(f"python {platform.python_version()}\nnumpy {np.__version__}\n"
                f"scipy {scipy.__version__}\ncommand: python3 scripts/make-census-scenes.py\n"
                f"seed: {SEED}\n")
    size = sum(os.path.getsize(os.path.join(OUT, s["file"])) for s in scenes)
    print(f"{len(scenes)} scenes, {size / 1e6:.2f} MB", file=sys.stderr)


if __name__ == "__main__":
    main()
