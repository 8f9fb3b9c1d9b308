#!/usr/bin/env python3
"""Checks the SigMF files bandwarden writes with the SigMF reference implementation.

The `sigmf` package on PyPI is the SigMF standard's reference implementation. For every file
named, this script

  validate FILE...   reads the recording with `sigmf.sigmffile.fromfile` (a warning, such as a
                     dataset whose size is not a whole number of samples, counts as a failure),
                     runs its `validate()` and, separately, validates the JSON against the
                     package's own schema (`sigmf.schema.get_schema()`) with jsonschema; then
                     checks what the standard says in words and the schema cannot: captures
                     and annotations sorted by core:sample_start, every annotation inside the
                     dataset, every namespace used declared in core:extensions. Prints one JSON
                     object per file (samples, captures, annotations as the reference reads them).
  tone FILE          measures, on the samples as the reference implementation reads them, the
                     strongest line inside the first annotation's span: its absolute frequency
                     (the capture's core:frequency plus the offset) and its level in dBFS (the
                     magnitude of a least-squares fit, refined on a 0.1-bin grid around the
                     largest FFT bin). Prints JSON.

Exit status 1 with the reason on the first file that fails. Used by tests/sigmf_output.rs.
Written against sigmf 1.14.0 (`pip install sigmf==1.14.0`).
"""

import json
import sys
import warnings

import numpy as np

try:
    import jsonschema
    import sigmf
    from sigmf import schema
    from sigmf.sigmffile import fromfile
except ImportError:
    sys.exit("sigmf-check-output.py: the sigmf package is missing: pip install sigmf==1.14.0")


def read(path):
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        meta = fromfile(path)
        meta.validate()
        x = meta.read_samples()
    return meta, x


def validate(path):
    meta, x = read(path)
    raw = meta._metadata  # the JSON as read, for the checks the schema cannot make
    jsonschema.validate(instance=raw, schema=schema.get_schema())
    n = len(x)
    caps = raw.get("captures", [])
    starts = [c["core:sample_start"] for c in caps]
    if starts != sorted(starts):
        raise ValueError(f"captures are not sorted by core:sample_start: {starts}")
    anns = raw.get("annotations", [])
    a_starts = [a["core:sample_start"] for a in anns]
    if a_starts != sorted(a_starts):
        raise ValueError("annotations are not sorted by core:sample_start")
    for a in anns:
        end = a["core:sample_start"] + a.get("core:sample_count", 0)
        if end > n:
            raise ValueError(f"annotation {a} ends at {end}, beyond the {n} samples of the dataset")
    declared = {e["name"] for e in raw["global"].get("core:extensions", [])}
    used = set()
    for section in (raw["global"], *caps, *anns):
        used |= {k.split(":")[0] for k in section if ":" in k and not k.startswith("core:")}
    if used - declared:
        raise ValueError(f"namespaces used but not declared: {sorted(used - declared)}")
    return {
        "path": path,
        "sigmf_version": sigmf.__version__,
        "samples": int(n),
        "captures": caps,
        "annotations": anns,
        "global": raw["global"],
    }


def tone(path):
    meta, x = read(path)
    raw = meta._metadata
    rate = raw["global"]["core:sample_rate"]
    centre = raw["captures"][0].get("core:frequency", 0.0)
    a = raw["annotations"][0]
    s, k = a["core:sample_start"], a["core:sample_count"]
    # Leave out the edges of the emission (a row's worth), where it is being keyed.
    margin = k // 10
    y = np.asarray(x[s + margin : s + k - margin], dtype=np.complex128)
    n = len(y)
    spec = np.abs(np.fft.fft(y)) ** 2
    peak = int(np.argmax(spec))
    t = np.arange(n) / rate
    best = (0.0, 0.0)
    for frac in np.arange(-1.0, 1.0001, 0.1):
        f = np.fft.fftfreq(n, 1 / rate)[peak] + frac * rate / n
        amp = abs(np.mean(y * np.exp(-2j * np.pi * f * t)))
        if amp > best[0]:
            best = (amp, f)
    return {
        "path": path,
        "freq_hz": float(centre + best[1]),
        "level_dbfs": float(20 * np.log10(best[0])),
        "samples": int(n),
    }


def main():
    if len(sys.argv) < 3 or sys.argv[1] not in ("validate", "tone"):
        sys.exit("usage: sigmf-check-output.py validate FILE... | tone FILE")
    for path in sys.argv[2:]:
        try:
            out = validate(path) if sys.argv[1] == "validate" else tone(path)
        except Exception as e:  # the reference implementation's own error, for the test to show
            sys.exit(f"sigmf-check-output.py: {path}: {type(e).__name__}: {e}")
        print(json.dumps(out))


if __name__ == "__main__":
    main()
