#!/usr/bin/env python3
"""Recordings written, and files checked, by the SigMF reference implementation.

The `sigmf` package on PyPI is the SigMF standard's reference implementation. This script uses
it to

  write DIR       write small recordings that exercise the parts of the standard bandwarden
                  reads (several captures with different datetimes; different frequencies;
                  capture header bytes and trailing bytes; two channels; an archive) into DIR,
                  with DIR/manifest.json saying what each holds. The level of each segment's
                  tone in the manifest is measured on the samples as the reference
                  implementation reads them back (`read_samples_in_capture`), so a test that
                  compares bandwarden's reading with it checks bandwarden against the reference.
  validate FILE   validate a recording (e.g. what `bandwarden demo -o x.sigmf-meta` writes)
                  with the reference implementation; exit status 1 if it is not valid.

Used by tests/sigmf_reference.rs. Written against sigmf 1.14.0 (the version on PyPI when it was
written; `pip install sigmf`).
"""

import json
import os
import sys
import warnings

import numpy as np

try:
    import sigmf
    from sigmf import SigMFFile
    from sigmf.sigmffile import fromfile
except ImportError:
    sys.exit("sigmf-reference.py: the sigmf package is missing: pip install sigmf")

RATE = 100_000.0  # samples/s
N = 20_000  # samples per capture: 0.2 s
SEED = 20260501


def tone_level_dbfs(x, offset_hz):
    """Level of a complex tone at `offset_hz` in `x`: the amplitude of its least-squares fit."""
    t = np.arange(len(x)) / RATE
    a = np.mean(x * np.exp(-2j * np.pi * offset_hz * t))
    return float(20 * np.log10(abs(a)))


def signal(rng, offset_hz, level_dbfs):
    """A tone (off the FFT bin centres) in -90 dBFS noise, complex64."""
    t = np.arange(N) / RATE
    amp = 10 ** (level_dbfs / 20)
    x = amp * np.exp(2j * np.pi * offset_hz * t + 1j * rng.uniform(0, 2 * np.pi))
    noise = 10 ** (-90 / 20) * (rng.standard_normal(N) + 1j * rng.standard_normal(N)) / np.sqrt(2)
    return (x + noise).astype(np.complex64)


def write_recording(folder, name, chunks, captures, global_extra=None, archive=False):
    """`chunks` are the bytes of the data file in order; `captures` (sample_start, fields)."""
    data_path = os.path.join(folder, name + ".sigmf-data")
    with open(data_path, "wb") as f:
        for c in chunks:
            f.write(c)
    info = {
        "core:datatype": "cf32_le",
        "core:sample_rate": RATE,
        "core:description": "bandwarden reference recording " + name,
    }
    info.update(global_extra or {})
    meta = SigMFFile(global_info=info)
    # Header and trailing bytes change how many bytes are samples: set them before the dataset.
    for start, fields in captures:
        meta.add_capture(start, metadata=dict(fields))
    meta.set_data_file(data_path)
    meta.validate()
    if archive:
        meta.tofile(os.path.join(folder, name), toarchive=True, overwrite=True)
        return os.path.join(folder, name + ".sigmf"), meta
    meta.tofile(os.path.join(folder, name + ".sigmf-meta"), overwrite=True)
    return os.path.join(folder, name + ".sigmf-meta"), meta


def segments_of(meta, tones, channel=None):
    """What each capture holds, measured on the samples the reference implementation reads."""
    out = []
    for k, cap in enumerate(meta.get_captures()):
        x = meta.read_samples_in_capture(k)
        if channel is not None:
            x = x[:, channel]
        offset_hz, _ = tones[k]
        centre = cap.get("core:frequency", 0.0)
        out.append(
            {
                "index": k,
                "center_hz": centre,
                "datetime": cap.get("core:datetime"),
                "samples": int(len(x)),
                "tone_hz": centre + offset_hz,
                "tone_dbfs": tone_level_dbfs(np.asarray(x, dtype=np.complex128), offset_hz),
            }
        )
    return out


def write(folder):
    os.makedirs(folder, exist_ok=True)
    rng = np.random.default_rng(SEED)
    manifest = {"sigmf_version": sigmf.__version__, "rate_hz": RATE, "recordings": {}}

    # Three captures at one frequency, each with its own datetime (a pause between them).
    tones = [(12_345.6, -20.0), (-23_456.7, -30.0), (31_111.1, -12.0)]
    xs = [signal(rng, f, l) for f, l in tones]
    times = ["2026-05-01T08:00:00.000Z", "2026-05-01T08:10:00.000Z", "2026-05-01T09:00:00.500Z"]
    caps = [
        (k * N, {"core:frequency": 433.92e6, "core:datetime": times[k]}) for k in range(3)
    ]
    path, meta = write_recording(folder, "times", [x.tobytes() for x in xs], caps)
    manifest["recordings"]["times"] = {"path": path, "segments": segments_of(meta, tones)}

    # Two captures at different frequencies.
    tones = [(8_000.0, -25.0), (-17_500.3, -15.0)]
    xs = [signal(rng, f, l) for f, l in tones]
    caps = [
        (0, {"core:frequency": 433.92e6, "core:datetime": "2026-05-02T10:00:00Z"}),
        (N, {"core:frequency": 868.3e6, "core:datetime": "2026-05-02T10:00:05Z"}),
    ]
    path, meta = write_recording(folder, "freqs", [x.tobytes() for x in xs], caps)
    manifest["recordings"]["freqs"] = {"path": path, "segments": segments_of(meta, tones)}

    # Header bytes before each capture and trailing bytes after the last, all holding float32
    # 1e9 values: read as samples they would show as a huge level.
    junk = lambda n: np.full(n // 4, 1e9, dtype=np.float32).tobytes()
    tones = [(5_000.0, -18.0), (-9_000.0, -28.0)]
    xs = [signal(rng, f, l) for f, l in tones]
    chunks = [junk(64), xs[0].tobytes(), junk(32), xs[1].tobytes(), junk(48)]
    caps = [
        (0, {"core:frequency": 145e6, "core:header_bytes": 64}),
        (N, {"core:frequency": 145e6, "core:header_bytes": 32}),
    ]
    path, meta = write_recording(folder, "headers", chunks, caps, {"core:trailing_bytes": 48})
    manifest["recordings"]["headers"] = {"path": path, "segments": segments_of(meta, tones)}

    # Two channels, interleaved sample by sample, a different tone in each.
    tones = [(14_000.0, -22.0), (-27_000.0, -16.0)]
    chans = [signal(rng, f, l) for f, l in tones]
    both = np.stack(chans, axis=1).reshape(-1)  # c0[0], c1[0], c0[1], ...
    caps = [(0, {"core:frequency": 2.4e9})]
    path, meta = write_recording(folder, "channels", [both.tobytes()], caps, {"core:num_channels": 2})
    manifest["recordings"]["channels"] = {
        "path": path,
        "channels": [segments_of(meta, [tones[c]], channel=c)[0] for c in range(2)],
    }

    # An archive (tar of archive/archive.sigmf-meta and archive/archive.sigmf-data).
    tones = [(-4_321.0, -21.0)]
    xs = [signal(rng, f, l) for f, l in tones]
    caps = [(0, {"core:frequency": 162.025e6, "core:datetime": "2026-05-03T00:00:00Z"})]
    path, meta = write_recording(folder, "archive", [xs[0].tobytes()], caps, archive=True)
    manifest["recordings"]["archive"] = {"path": path, "segments": segments_of(meta, tones)}
    os.remove(os.path.join(folder, "archive.sigmf-data"))  # only the archive holds the samples

    manifest["datatypes"] = write_datatypes(folder, rng)

    with open(os.path.join(folder, "manifest.json"), "w") as f:
        json.dump(manifest, f, indent=1)
    print(os.path.join(folder, "manifest.json"))


# Every SigMF datatype: numpy dtype of one number, and whether it is unsigned.
DATATYPES = {}
for kind, np_kind in (("f", "f"), ("i", "i"), ("u", "u")):
    for bits in ((32, 64) if kind == "f" else (8, 16, 32)):
        for endian in (("",) if bits == 8 else ("_le", "_be")):
            order = "<" if endian in ("", "_le") else ">"
            for cr in "cr":
                DATATYPES[f"{cr}{kind}{bits}{endian}"] = f"{order}{np_kind}{bits // 8}"


def to_numbers(x, dtype):
    """Float samples at full scale +-1 written as `dtype` numbers (integers rounded, clipped)."""
    dt = np.dtype(dtype)
    if dt.kind == "f":
        return x.astype(dt)
    bits = dt.itemsize * 8
    if dt.kind == "i":
        scaled = np.round(x * 2.0 ** (bits - 1))
        return np.clip(scaled, -(2 ** (bits - 1)), 2 ** (bits - 1) - 1).astype(dt)
    mid = (2.0**bits - 1) / 2
    return np.clip(np.round(x * mid + mid), 0, 2**bits - 1).astype(dt)


def write_datatypes(folder, rng):
    """One recording per datatype holding one tone, written and read back by the reference.

    A complex recording holds a complex tone; a real one a cosine, which bandwarden shows as
    its positive half (a line of half the amplitude, Euler: cos = (e^{jw} + e^{-jw}) / 2)."""
    out = {}
    t = np.arange(N) / RATE
    for name, dtype in DATATYPES.items():
        offset_hz = 11_111.1 if name[0] == "c" else 31_234.5
        amp = 10 ** (-12 / 20)
        phase = rng.uniform(0, 2 * np.pi)
        if name[0] == "c":
            x = amp * np.exp(2j * np.pi * offset_hz * t + 1j * phase)
            parts = [to_numbers(x.real, dtype), to_numbers(x.imag, dtype)]
            # np.stack returns native byte order: cast back to the datatype's.
            numbers = np.stack(parts, axis=1).astype(dtype)
        else:
            x = amp * np.cos(2 * np.pi * offset_hz * t + phase)
            numbers = to_numbers(x, dtype)
        data_path = os.path.join(folder, "dt-" + name + ".sigmf-data")
        with open(data_path, "wb") as f:
            f.write(numbers.tobytes())
        meta = SigMFFile(
            global_info={
                "core:datatype": name,
                "core:sample_rate": RATE,
                "core:description": "bandwarden reference datatype " + name,
            }
        )
        meta.add_capture(0, metadata={"core:frequency": 1e6})
        meta.set_data_file(data_path)
        meta.validate()
        meta_path = os.path.join(folder, "dt-" + name + ".sigmf-meta")
        meta.tofile(meta_path, overwrite=True)
        # The level as the reference reads the samples back: the least-squares amplitude of the
        # tone in its own scaling (autoscale maps integers onto +-1).
        back = np.asarray(fromfile(meta_path).read_samples(), dtype=np.complex128).reshape(-1)
        a = np.mean(back * np.exp(-2j * np.pi * offset_hz * t))
        # For a cosine, mean(cos * e^{-jwt}) is A/2: the positive line's amplitude.
        level = 20 * np.log10(abs(a))
        out[name] = {"path": meta_path, "tone_hz": 1e6 + offset_hz, "tone_dbfs": float(level)}
    return out


def validate(path):
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # a warning (sample count, checksum) fails validation
        meta = fromfile(path)
        meta.validate()
        x = meta.read_samples()
    print(f"valid: {path}: {len(x)} samples, {len(meta.get_captures())} capture(s)")


def main():
    if len(sys.argv) != 3 or sys.argv[1] not in ("write", "validate"):
        sys.exit("usage: sigmf-reference.py write DIR | validate FILE")
    try:
        (write if sys.argv[1] == "write" else validate)(sys.argv[2])
    except Exception as e:  # the reference implementation's own error, for the test to show
        sys.exit(f"sigmf-reference.py: {type(e).__name__}: {e}")


if __name__ == "__main__":
    main()
