#!/usr/bin/env python3
"""Write the .npy fixtures in tests/compat with numpy itself.

Run from the repository root: python3 tests/compat/make_npy_fixtures.py
The files are committed; tests/formats.rs checks that tactread reads them.
Rerun only to add fixtures: the committed ones must keep loading as they are.
Written with numpy 2.4.6 (the folder name records the version).
"""
import json
import os

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "numpy-" + np.__version__)
os.makedirs(OUT, exist_ok=True)

# The docs' worked example as .npy: float64, C order, time + position + 4 taxels.
example = np.array(
    [
        [0.00, 0.0, 0.12, 0.10, 0.11, 0.09],
        [0.02, 0.4, 3.85, 0.14, 0.10, 0.12],
        [0.04, 0.8, 4.10, 3.92, 0.13, 0.11],
        [0.06, 1.2, 0.20, 4.05, 0.12, 0.10],
        [0.08, 1.6, 0.15, 0.18, 0.11, 3.70],
    ],
    dtype=np.float64,
)
np.save(os.path.join(HERE, "v1", "tea-jar-npy.npy"), example)

# Synthetic arrays whose values follow a formula the Rust test recomputes:
# row r, taxel k -> r + k / 4 (exact in binary); time r / 100; position r / 2.
ROWS, TAXELS = 37, 3
r = np.arange(ROWS, dtype=np.float64)[:, None]
k = np.arange(TAXELS, dtype=np.float64)[None, :]
taxels = r + k / 4
time = r / 100
pos = r / 2


def manifest(stem, time_col, pos_col):
    return {
        "format": "tactread-recording",
        "version": 1,
        "frames": stem + ".npy",
        "npy_columns": {"time_s": time_col, "position_mm": pos_col},
        "sensor": {"taxels": TAXELS, "sample_rate_hz": 100.0},
        "notes": "written by numpy " + np.__version__ + " (tests/compat/make_npy_fixtures.py)",
    }


fixtures = {
    # float32, C order, taxels only: time comes from sample_rate_hz.
    "f4-c-taxels-only": (taxels.astype("<f4"), False, False),
    # float64, Fortran order, time + position + taxels.
    "f8-fortran-time-position": (np.asfortranarray(np.hstack([time, pos, taxels])), True, True),
    # big-endian float64, C order, time + taxels.
    "f8-bigendian-time": (np.hstack([time, taxels]).astype(">f8"), True, False),
}
for stem, (array, time_col, pos_col) in fixtures.items():
    np.save(os.path.join(OUT, stem + ".npy"), array)
    with open(os.path.join(OUT, stem + ".json"), "w") as f:
        json.dump(manifest(stem, time_col, pos_col), f, indent=2)
        f.write("\n")
print("wrote fixtures to", OUT)
