#!/usr/bin/env python3
"""Cross-check whorl's Savitzky-Golay derivative, derivative correlation and Pearson
correlation against scipy and numpy.

    python3 -m pip install -r scripts/requirements-crosscheck-science.txt
    python3 scripts/crosscheck_science.py

Builds random test signals with a seeded generator, has whorl compute its values through
`cargo run --example crosscheck_science`, and compares them with
`scipy.signal.savgol_coeffs` / `scipy.signal.savgol_filter(..., deriv=1)` (Savitzky &
Golay, Anal. Chem. 1964, 36, 1627) and `numpy.corrcoef`. Exits non-zero on a mismatch.
"""

import json
import os
import subprocess
import sys
import tempfile

import numpy as np
from scipy.signal import savgol_coeffs, savgol_filter

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
# whorl computes in f64 from f32 inputs; the inputs below are rounded to f32 first, so the
# two sides differ only by summation order.
TOL = 1e-9


def cases(rng):
    out = []
    x = np.arange(400)
    for window, order in [(5, 2), (7, 2), (11, 2), (11, 3), (15, 4), (21, 2), (9, 1)]:
        for _ in range(3):
            bands = sum(
                rng.uniform(0.2, 1.0) * np.exp(-(((x - rng.uniform(0, 400)) / rng.uniform(3, 15)) ** 2))
                for _ in range(6)
            )
            a = bands + 0.02 * rng.standard_normal(x.size)
            b = bands + rng.uniform(-1, 1) * 0.002 * x + 0.05 * rng.standard_normal(x.size)
            out.append({
                "a": a.astype(np.float32).astype(float).tolist(),
                "b": b.astype(np.float32).astype(float).tolist(),
                "window": window,
                "order": order,
            })
    return out


def whorl(case_list):
    with tempfile.NamedTemporaryFile("w", suffix=".json", delete=False) as f:
        json.dump({"cases": case_list}, f)
        path = f.name
    try:
        text = subprocess.check_output(
            ["cargo", "run", "--quiet", "--example", "crosscheck_science", "--", path], cwd=ROOT)
    finally:
        os.unlink(path)
    return json.loads(text)


def main():
    rng = np.random.default_rng(20260101)
    case_list = cases(rng)
    got = whorl(case_list)
    failures = 0
    for i, (case, w) in enumerate(zip(case_list, got)):
        window, order = case["window"], case["order"]
        a, b = np.array(case["a"]), np.array(case["b"])
        half = window // 2
        # use="dot": coefficients in the order they multiply y[i - half .. i + half].
        coeffs = savgol_coeffs(window, order, deriv=1, use="dot")
        if not np.allclose(w["coefficients"], coeffs, rtol=0, atol=TOL):
            failures += 1
            print(f"case {i}: coefficients differ: {w['coefficients']} vs {coeffs.tolist()}")
        da = savgol_filter(a, window, order, deriv=1, mode="interp")
        db = savgol_filter(b, window, order, deriv=1, mode="interp")
        ours = np.array([np.nan if v is None else v for v in w["derivative_a"]])
        interior = slice(half, a.size - half)
        if not np.allclose(ours[interior], da[interior], rtol=0, atol=1e-7):
            failures += 1
            print(f"case {i}: derivative differs by {np.nanmax(np.abs(ours[interior] - da[interior]))}")
        if not np.all(np.isnan(ours[:half])) or not np.all(np.isnan(ours[a.size - half:])):
            failures += 1
            print(f"case {i}: derivative defined where the window does not fit")
        r = np.corrcoef(da[interior], db[interior])[0, 1]
        if abs(w["derivative_correlation"] - max(r, 0.0)) > 1e-7:
            failures += 1
            print(f"case {i}: derivative correlation {w['derivative_correlation']} vs {r}")
        p = np.corrcoef(a, b)[0, 1]
        if abs(w["pearson"] - p) > 1e-7:
            failures += 1
            print(f"case {i}: pearson {w['pearson']} vs {p}")
    print(f"crosscheck_science: {len(case_list)} cases, {failures} mismatches "
          f"(numpy {np.__version__}, scipy {__import__('scipy').__version__})")
    sys.exit(1 if failures else 0)


if __name__ == "__main__":
    main()
