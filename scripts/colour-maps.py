#!/usr/bin/env python3
"""Prints the colour-map tables of src/tui/colour.rs.

viridis, magma and inferno were published by their authors (Nathaniel J. Smith, Stefan van der
Walt, Eric Firing) under CC0; matplotlib ships them in matplotlib/_cm_listed.py as 256 RGB
triples in 0..1. We keep 33 of them (every 8th, plus the last) as 8-bit RGB and interpolate
between those at run time. Run with matplotlib installed:

    python3 scripts/colour-maps.py > /tmp/maps.rs
"""
import matplotlib
from matplotlib import _cm_listed as listed

def table(name, data):
    picks = list(range(0, 256, 8)) + [255]
    rows = []
    for i in picks:
        r, g, b = (round(c * 255) for c in data[i])
        rows.append(f"[{r}, {g}, {b}]")
    body = ",\n    ".join(", ".join(rows[k:k + 6]) for k in range(0, len(rows), 6))
    return f"pub const {name.upper()}: [[u8; 3]; {len(picks)}] = [\n    {body},\n];"

print(f"// Sampled from matplotlib {matplotlib.__version__} by scripts/colour-maps.py.")
for name in ("viridis", "magma", "inferno"):
    print(table(name, getattr(listed, f"_{name}_data")))
