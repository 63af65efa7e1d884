#!/usr/bin/env python3
"""Checks whorl's numerics against NumPy, SciPy and pybaselines.

Builds deterministic inputs with a seeded NumPy generator, sends them in one request to the
`numerics_probe` example (which calls the real library functions), computes the same
quantities with the reference libraries and prints one line per comparison. Exits 1 if any
comparison fails.

    pip install -r scripts/requirements-crosscheck.txt
    python3 scripts/crosscheck.py                      # builds and runs the probe with cargo
    python3 scripts/crosscheck.py --probe target/release/examples/numerics_probe
    python3 scripts/crosscheck.py --mutate             # shows that every comparison can fail

See docs/crosscheck.md for what is compared and why the tolerances are what they are.
"""

from __future__ import annotations

import argparse
import copy
import json
import subprocess
import sys
from importlib.metadata import version
from pathlib import Path

import numpy as np
import pybaselines
import scipy.optimize
import scipy.sparse
import scipy.sparse.csgraph
import scipy.spatial
import scipy.signal
import scipy.stats

ROOT = Path(__file__).resolve().parent.parent
SEED = 20250117
NUMPY = f"NumPy {np.__version__}"
SCIPY = f"SciPy {scipy.__version__}"
PYBASELINES = f"pybaselines {version('pybaselines')}"


def q(x):
    """Rounds to 12 significant digits, so that the JSON text parses to the same f64 in Rust.

    serde_json (without its `float_roundtrip` feature) computes a decimal as
    significand / 10^k, which is exact only while the significand fits in 53 bits. Twelve
    digits keep every input exactly representable on both sides; the `echo` check verifies it.
    """
    return np.array([float(f"{v:.12g}") for v in np.ravel(x)]).reshape(np.shape(x))


def f32(x):
    """The f64 values of x after rounding to f32, as whorl stores prepared vectors."""
    return np.asarray(x, dtype=np.float32).astype(np.float64)


# ---------------------------------------------------------------------------------------------
# Inputs


def spectrum(rng, n, bands, noise, baseline):
    """A synthetic optical spectrum: Gaussian and Lorentzian bands, noise, a baseline."""
    x = np.linspace(0.0, 1.0, n)
    y = np.zeros(n)
    for _ in range(bands):
        c, w, h = rng.uniform(0.05, 0.95), rng.uniform(0.002, 0.02), rng.uniform(0.1, 1.0)
        if rng.random() < 0.5:
            y += h * np.exp(-0.5 * ((x - c) / w) ** 2)
        else:
            y += h * w * w / ((x - c) ** 2 + w * w)
    y += noise * rng.standard_normal(n)
    if baseline == "slope":
        y += rng.uniform(-0.5, 0.5) + rng.uniform(-1.0, 1.0) * x
    elif baseline == "curve":
        # A broad fluorescence-like hump plus a quadratic.
        y += 2.0 * np.exp(-0.5 * ((x - rng.uniform(0.2, 0.8)) / 0.35) ** 2) + 0.8 * x**2
    return y


def build_cases(rng):
    """Returns {group: [case, ...]}; each case is a probe request entry."""
    g = {}
    lengths = [1801, 5000, 1000, 101, 10, 3, 2]  # long first: --mutate disturbs the first two

    values = q(rng.standard_normal(500) * 10.0 ** rng.integers(-6, 6, 500))
    g["echo"] = [{"op": "echo", "values": values.tolist()}]

    vec = []
    for n in lengths:
        for kind in ("uniform", "normal", "spectrum"):
            if kind == "uniform":
                a, b = rng.random(n), rng.random(n)
            elif kind == "normal":
                a, b = rng.standard_normal(n), rng.standard_normal(n)
            else:
                a = spectrum(rng, n, 8, 0.01, "slope")
                b = a + 0.05 * rng.standard_normal(n)
            vec.append((q(a), q(b)))
    g["cosine"] = [{"op": "cosine", "a": a.tolist(), "b": b.tolist()} for a, b in vec]
    g["pearson"] = [{"op": "pearson", "a": a.tolist(), "b": b.tolist()} for a, b in vec]
    # Masked bins, as for the CO2 region of an IR grid.
    for a, b in vec:
        if len(a) >= 10:
            active = rng.random(len(a)) > 0.2
            case = {"op": "pearson", "a": a.tolist(), "b": b.tolist(), "active": active.tolist()}
            g["pearson"].append(case)

    peaks = []
    for n in (300, 1801, 4000):
        for baseline in ("none", "slope", "curve"):
            peaks.append(q(spectrum(rng, n, 12, 0.005, baseline)))
    for n in (1801, 500, 50, 3, 2, 1, 0):
        peaks.append(q(rng.standard_normal(n)))
    # Few distinct levels: plateaus, equal-height neighbours and half-height crossings that
    # land exactly on a sample, where definitions of peak picking differ most.
    for n in (20, 200, 2000):
        peaks.append(rng.integers(0, 4, n).astype(float))
        peaks.append(np.cumsum(rng.integers(-1, 2, n)).astype(float) / 4.0)
    peaks.append(np.array([0.0, 1.0, 0.0, 3.0, 1.0, 3.0, 0.0, 4.0, 0.0]))
    peaks.append(np.array([0.0, 2.0, 2.0, 2.0, 0.0, 1.0, 1.0, 0.0, 5.0, 5.0]))
    peaks.append(np.array([1.0, 1.0, 1.0]))
    g["find_maxima"] = [{"op": "find_maxima", "y": y.tolist()} for y in peaks]

    als = []
    for n, lam, p, baseline, max_iter, tol in [
        (1000, 1e5, 0.01, "curve", 50, 1e-3),
        (300, 1e3, 0.01, "slope", 50, 1e-3),
        (500, 1e4, 0.05, "curve", 50, 1e-3),
        (1000, 1e5, 0.001, "slope", 50, 1e-3),
        (1701, 1e5, 0.01, "curve", 50, 1e-3),  # the Raman grid, 100..3500 cm-1 at 2 cm-1
        (1801, 1e6, 0.01, "curve", 50, 1e-3),
        (2000, 1e7, 0.02, "slope", 50, 1e-3),
        (3, 1e5, 0.01, "slope", 50, 1e-3),
        (4, 1e5, 0.01, "slope", 50, 1e-3),
        # With tol = 1e-3 both stop only once no weight changes, so these stop early on
        # purpose: on the iteration cap (max_iter + 1 solves on both sides) and on a loose tol.
        (1000, 1e5, 0.01, "curve", 0, 1e-3),
        (1000, 1e5, 0.01, "curve", 2, 1e-3),
        (1000, 1e5, 0.01, "curve", 50, 0.3),
    ]:
        y = q(spectrum(rng, n, 15, 0.01, baseline))
        als.append({"op": "asls", "y": y.tolist(), "lam": lam, "p": p, "max_iter": max_iter, "tol": tol})
    g["asls"] = als

    g["rubber_band"] = [
        {"op": "rubber_band", "y": q(spectrum(rng, n, 10, 0.01, b)).tolist()}
        for n in (3, 50, 1000, 1801)
        for b in ("slope", "curve")
    ]

    t = q(10.0 ** -rng.uniform(0.0, 4.0, 2000))  # A from 0 to 4, whorl's clamp is at T = 1e-4
    t = np.concatenate([t, [1.0, 0.1, 0.01, 1e-4]])
    g["absorbance"] = [
        {"op": "absorbance", "t": t.tolist(), "unit": "transmittance"},
        {"op": "absorbance", "t": q(100.0 * t).tolist(), "unit": "transmittance-percent"},
    ]

    res = []
    for start, stop, step, src_step, jitter in [
        (400.0, 4000.0, 2.0, 4.0, 0.0),
        (400.0, 4000.0, 2.0, 3.857, 0.3),
        (100.0, 3500.0, 2.0, 2.0, 0.2),
        (-1.0, 14.0, 0.04, 0.05, 0.3),
        (0.0, 10.0, 2.0, 2.5, 0.0),
    ]:
        # The source starts and ends inside the grid so that both edges are exercised.
        xs = np.arange(start + 0.013 * (stop - start), stop - 0.011 * (stop - start), src_step)
        xs = xs + jitter * src_step * rng.uniform(-0.5, 0.5, len(xs))
        ys = np.sin(xs / (20 * step)) + 0.1 * rng.standard_normal(len(xs))
        grid = {"start": start, "stop": stop, "step": step, "masks": []}
        res.append({"op": "resample", "x": q(xs).tolist(), "y": q(ys).tolist(), "grid": grid})
    g["resample"] = res

    ms = []
    for k in range(40):
        mz = rng.choice(np.arange(12, 500), size=rng.integers(1, 60), replace=False)
        ab = q(rng.uniform(0.5, 999.0, len(mz)))
        ref_mz = rng.choice(np.arange(12, 500), size=rng.integers(1, 60), replace=False)
        if k % 2:  # share most ions, as a near match does
            ref_mz = np.unique(np.concatenate([mz[: len(mz) * 3 // 4], ref_mz[:5]]))
        ref_ab = q(rng.uniform(0.5, 999.0, len(ref_mz)))
        params = {"intensity_exponent": 0.6, "mass_exponent": 3.0, "reverse": bool(k % 4 == 3)}
        ms.append({
            "op": "stein_scott",
            "unknown": np.column_stack([mz, ab]).tolist(),
            "reference": np.column_stack([ref_mz, ref_ab]).tolist(),
            "params": params,
        })
    g["stein_scott"] = ms

    ov = []
    for n_u, n_r, span, tol in [
        (0, 5, 100, 1),
        (10, 12, 100, 6),
        (40, 35, 1000, 6),
        (80, 80, 300, 4),
        (200, 150, 3000, 6),
    ]:
        ov.append({
            "op": "peak_overlap",
            "unknown": q(rng.uniform(0, span, n_u)).tolist(),
            "reference": q(rng.uniform(0, span, n_r)).tolist(),
            "tolerance": float(tol),
        })
    # Clustered peaks, where a greedy matching can go wrong.
    base = rng.uniform(0, 1000, 30)
    ov.append({
        "op": "peak_overlap",
        "unknown": q(np.repeat(base, 3) + rng.uniform(-5, 5, 90)).tolist(),
        "reference": q(np.repeat(base, 2) + rng.uniform(-5, 5, 60)).tolist(),
        "tolerance": 4.0,
    })
    g["peak_overlap"] = ov

    nn = []
    # Overdetermined with noise first (--mutate disturbs the first two: a fit that leaves a
    # residual, so that moving b moves both x and the residual norm).
    for m, n in [(200, 6), (60, 4), (1000, 3), (40, 12), (12, 12), (8, 1), (1, 1), (6, 9), (3, 7)]:
        a = q(rng.standard_normal((m, n)))
        b = q(rng.standard_normal(m))
        nn.append({"op": "nnls", "columns": a.T.tolist(), "b": b.tolist()})
    # Mixtures of non-negative spectra, as the mixture fit sees them: sticks of EI spectra
    # (nominal m/z 1-300) and Gaussian bands (an optical grid), mixed with positive weights,
    # plus noise and a column that is not in the mixture.
    for n, kind in [(3, "sticks"), (5, "sticks"), (4, "bands"), (6, "bands")]:
        if kind == "sticks":
            a = np.zeros((300, n))
            for j in range(n):
                ions = rng.choice(300, size=rng.integers(8, 40), replace=False)
                a[ions, j] = rng.uniform(0.01, 1.0, len(ions)) ** 2
        else:
            a = np.column_stack([spectrum(rng, 900, 6, 0.0, "none") for _ in range(n)])
        w = rng.uniform(0.1, 2.0, n)
        w[-1] = 0.0
        b = a @ w + 0.01 * rng.standard_normal(a.shape[0])
        nn.append({"op": "nnls", "columns": q(a).T.tolist(), "b": q(b).tolist()})
    # Every column opposite to b: the solution is x = 0.
    a = q(rng.uniform(0.0, 1.0, (30, 4)))
    nn.append({"op": "nnls", "columns": a.T.tolist(), "b": q(-a @ np.ones(4)).tolist()})
    g["nnls"] = nn
    # Raman-like spectra with one- and two-point spikes (up and down) of several sizes, on
    # flat stretches and on band flanks, including bands as narrow as three points.
    ds = []
    for n, narrow, spikes in [(1500, 0.002, 6), (1000, 0.0015, 4), (3000, 0.001, 10), (400, 0.004, 2), (50, 0.02, 1)]:
        y = 1000.0 * spectrum(rng, n, 10, 0.0, "curve") + 5.0 * rng.standard_normal(n)
        # A few narrow bands: Lorentzians a few samples wide, as the silicon line on a coarse grid.
        for c in rng.uniform(0.1, 0.9, 3):
            y += 5000.0 * narrow**2 / ((np.linspace(0.0, 1.0, n) - c) ** 2 + narrow**2)
        for _ in range(spikes):
            k = int(rng.integers(2, n - 3))
            h = rng.choice([-1.0, 1.0]) * rng.uniform(50.0, 3000.0)
            y[k] += h
            if rng.random() < 0.3:
                y[k + 1] += h * rng.uniform(0.5, 1.0)
        for threshold in (8.0, 5.0):
            ds.append({"op": "despike", "y": q(y).tolist(), "threshold": threshold})
    # Quantised counts, where the median absolute deviation of the differences is 0.
    y = np.round(1030.0 + rng.standard_normal(800) * 0.4)
    y[400] += 25.0
    ds.append({"op": "despike", "y": y.tolist(), "threshold": 8.0})
    g["despike"] = ds
    return g


# ---------------------------------------------------------------------------------------------
# Comparisons. Each returns (cases compared, max deviation); CHECKS holds the tolerances.


def check_echo(cases, results):
    # Python's json / float(): correctly rounded decimal parsing (IEEE 754).
    dev = max(int(np.sum(np.array(r["values"]) != np.array(c["values"]))) for c, r in zip(cases, results))
    return len(cases), dev


def check_cosine(cases, results):
    # numpy.linalg.norm and the @ operator (NumPy documentation): a.b / (|a| |b|), on the
    # same f32-rounded values whorl sees, in f64.
    devs = []
    for c, r in zip(cases, results):
        a, b = f32(c["a"]), f32(c["b"])
        ref = a @ b / (np.linalg.norm(a) * np.linalg.norm(b))
        devs.append(abs(r["value"] - ref) / abs(ref))
    return len(cases), max(devs)


def pearson_inputs(c):
    a, b = f32(c["a"]), f32(c["b"])
    if "active" in c:
        m = np.array(c["active"])
        a, b = a[m], b[m]
    return a, b


def check_pearsonr(cases, results):
    # scipy.stats.pearsonr (SciPy reference guide): the statistic r.
    devs = [
        abs(r["value"] - scipy.stats.pearsonr(*pearson_inputs(c)).statistic)
        for c, r in zip(cases, results)
    ]
    return len(devs), max(devs)


def check_corrcoef(cases, results):
    # numpy.corrcoef (NumPy reference): the off-diagonal entry of the correlation matrix.
    devs = [abs(r["value"] - np.corrcoef(*pearson_inputs(c))[0, 1]) for c, r in zip(cases, results)]
    return len(devs), max(devs)


def scipy_peaks(y):
    y = np.asarray(y, dtype=float)
    # scipy.signal.find_peaks, peak_prominences, peak_widths (SciPy reference guide).
    peaks, _ = scipy.signal.find_peaks(y)
    prom, lb, rb = scipy.signal.peak_prominences(y, peaks)
    _, _, lips, rips = scipy.signal.peak_widths(y, peaks, rel_height=0.5)
    return peaks, prom, lb, rb, lips, rips


def check_peak_indices(cases, results):
    # scipy.signal.find_peaks: local maxima, a plateau counted once at its middle; and the
    # bases of scipy.signal.peak_prominences. Deviation: number of cases that differ.
    bad = 0
    for c, r in zip(cases, results):
        peaks, _, lb, rb, _, _ = scipy_peaks(c["y"])
        m = r["maxima"]
        same = [x["index"] for x in m] == peaks.tolist()
        same = same and [x["left_base"] for x in m] == lb.tolist()
        same = same and [x["right_base"] for x in m] == rb.tolist()
        bad += not same
    return len(cases), bad


def matched_peaks(cases, results):
    """Yields (whorl maxima, scipy arrays) for the cases whose peak indices agree."""
    for c, r in zip(cases, results):
        s = scipy_peaks(c["y"])
        if [x["index"] for x in r["maxima"]] == s[0].tolist():
            yield r["maxima"], s


def check_prominences(cases, results):
    # scipy.signal.peak_prominences (SciPy reference guide).
    dev, n = 0.0, 0
    for m, (_, prom, _, _, _, _) in matched_peaks(cases, results):
        n += 1
        if len(m):
            dev = max(dev, float(np.max(np.abs(np.array([x["prominence"] for x in m]) - prom))))
    return n, dev


def check_widths(cases, results):
    # scipy.signal.peak_widths(y, peaks, rel_height=0.5): left_ips, right_ips (SciPy reference guide).
    dev, n = 0.0, 0
    for m, (_, _, _, _, lips, rips) in matched_peaks(cases, results):
        n += 1
        if len(m):
            dl = np.abs(np.array([x["left_half"] for x in m]) - lips)
            dr = np.abs(np.array([x["right_half"] for x in m]) - rips)
            dev = max(dev, float(np.max(dl)), float(np.max(dr)))
    return n, dev


def check_areas(cases, results):
    # The area between SciPy's half-prominence crossings (peak_widths, rel_height=0.5) by
    # numpy.trapezoid over the crossings (y interpolated with numpy.interp) and the samples
    # between them, x the sample index. Deviation: max |whorl - numpy| / (max y - min y).
    dev, n = 0.0, 0
    for c, r in zip(cases, results):
        y = np.array(c["y"])
        s = scipy_peaks(y)
        if [x["index"] for x in r["maxima"]] != s[0].tolist():
            continue
        n += 1
        idx = np.arange(len(y), dtype=float)
        span = max(float(np.ptp(y)), 1e-300) if len(y) else 1.0
        for m, lo, hi in zip(r["maxima"], s[4], s[5]):
            inside = idx[(idx > lo) & (idx < hi)]
            xs = np.concatenate([[lo], inside, [hi]])
            ref = float(np.trapezoid(np.interp(xs, idx, y), xs))
            dev = max(dev, abs(m["area"] - ref) / span)
    return n, dev


def check_asls(cases, results):
    # pybaselines.Baseline().asls (pybaselines documentation, whittaker.asls): same model,
    # weights (p above the baseline, 1 - p elsewhere), start (all weights 1), stopping rule
    # (|w_new - w_old| / |w_old| < tol, at most max_iter + 1 solves) and diff_order 2.
    # Deviation: max |whorl - pybaselines| / (max y - min y).
    dev = 0.0
    for c, r in zip(cases, results):
        y = np.array(c["y"])
        if len(y) < 3:
            continue  # pybaselines needs more points than the difference order
        ref, _ = pybaselines.Baseline().asls(
            y, lam=c["lam"], p=c["p"], diff_order=2, max_iter=c["max_iter"], tol=c["tol"]
        )
        dev = max(dev, float(np.max(np.abs(np.array(r["baseline"]) - ref)) / np.ptp(y)))
    return len(cases), dev


def check_rubber_band(cases, results):
    # scipy.spatial.ConvexHull (Qhull; SciPy reference guide): the facets whose outward normal
    # points down form the lower hull, joined by numpy.interp.
    dev = 0.0
    for c, r in zip(cases, results):
        y = np.array(c["y"])
        x = np.arange(len(y), dtype=float)
        hull = scipy.spatial.ConvexHull(np.column_stack([x, y]))
        lower = np.unique(hull.simplices[hull.equations[:, 1] < 0])
        ref = np.interp(x, x[lower], y[lower])
        dev = max(dev, float(np.max(np.abs(np.array(r["baseline"]) - ref)) / np.ptp(y)))
    return len(cases), dev


def check_absorbance(cases, results):
    # numpy.log10 (NumPy reference): A = -log10(T), T as a fraction (IUPAC Gold Book).
    dev = 0.0
    for c, r in zip(cases, results):
        t = np.array(c["t"]) / (100.0 if c["unit"] == "transmittance-percent" else 1.0)
        dev = max(dev, float(np.max(np.abs(np.array(r["absorbance"]) + np.log10(t)))))
    return len(cases), dev


def check_resample(cases, results):
    # numpy.interp(x, xp, fp, left=0, right=0) (NumPy reference): linear interpolation, zero
    # outside the source, as whorl does where the source is coarser than the grid.
    dev = 0.0
    for c, r in zip(cases, results):
        ref = np.interp(np.array(r["x"]), c["x"], c["y"], left=0.0, right=0.0)
        dev = max(dev, float(np.max(np.abs(np.array(r["y"]) - ref)) / np.ptp(c["y"])))
    return len(cases), dev


def check_stein_scott(cases, results):
    # No reference library: F_D = (sum W_U W_L)^2 / (sum W_U^2 sum W_L^2), W = I^0.6 (m/z)^3
    # (Stein & Scott, J. Am. Soc. Mass Spectrom. 1994, 5, 859), in NumPy over the union of
    # m/z; for a reverse search only the unknown's ions present in the reference count.
    devs = []
    for c, r in zip(cases, results):
        u, lib = np.array(c["unknown"]), np.array(c["reference"])
        if c["params"]["reverse"]:
            u = u[np.isin(u[:, 0], lib[:, 0])]
        mz = np.union1d(u[:, 0], lib[:, 0])
        wu, wl = np.zeros(len(mz)), np.zeros(len(mz))
        wu[np.searchsorted(mz, u[:, 0])] = u[:, 1] ** 0.6 * u[:, 0] ** 3
        wl[np.searchsorted(mz, lib[:, 0])] = lib[:, 1] ** 0.6 * lib[:, 0] ** 3
        ref = (wu @ wl) ** 2 / ((wu @ wu) * (wl @ wl)) if len(u) else 0.0
        devs.append(abs(r["dot"] - ref) / max(ref, 1e-300) if ref else abs(r["dot"]))
    return len(cases), max(devs)


def check_peak_overlap(cases, results):
    # scipy.sparse.csgraph.maximum_bipartite_matching (SciPy reference guide): the largest
    # one-to-one matching of peaks within the tolerance. Deviation: max |difference in count|.
    dev = 0
    for c, r in zip(cases, results):
        u, lib = np.array(c["unknown"]), np.array(c["reference"])
        if len(u) and len(lib):
            near = np.abs(u[:, None] - lib[None, :]) <= c["tolerance"]
            adj = scipy.sparse.csr_array(near.astype(np.int8))
            match = scipy.sparse.csgraph.maximum_bipartite_matching(adj, perm_type="column")
            ref = int(np.sum(match >= 0))
        else:
            ref = 0
        dev = max(dev, abs(r["matched"] - ref))
    return len(cases), dev


def scipy_nnls(c):
    # scipy.optimize.nnls (SciPy reference guide): Lawson & Hanson's active-set NNLS.
    a, b = np.array(c["columns"]).T, np.array(c["b"])
    return scipy.optimize.nnls(a, b)


def check_nnls_x(cases, results):
    # The solution vector, where it is unique: A of full column rank (m >= n). Deviation:
    # max |x_whorl - x_scipy| / max(1, max |x_scipy|).
    devs, n = [0.0], 0
    for c, r in zip(cases, results):
        a = np.array(c["columns"]).T
        if a.shape[0] < a.shape[1] or np.linalg.matrix_rank(a) < a.shape[1]:
            continue
        n += 1
        x, _ = scipy_nnls(c)
        devs.append(float(np.max(np.abs(np.array(r["x"]) - x))) / max(1.0, float(np.max(np.abs(x)))))
    return n, max(devs)


def check_nnls_residual(cases, results):
    # The residual norm |A x - b| (unique even where x is not), relative to |b|; and whorl's
    # x must be feasible (x >= 0) and converged, else the deviation is 1.
    devs = []
    for c, r in zip(cases, results):
        _, rnorm = scipy_nnls(c)
        feasible = r["converged"] and min(r["x"], default=0.0) >= 0.0
        devs.append(abs(r["residual_norm"] - rnorm) / max(float(np.linalg.norm(c["b"])), 1e-300) if feasible else 1.0)
    return len(devs), max(devs)
def whitaker_hayes(y, threshold, max_width=2, quiet=1.0 / 3.0, m=3):
    """Despiking as Whitaker & Hayes, Chemometr. Intell. Lab. Syst. 179 (2018) 82-84 describe
    it (modified Z-scores of the first differences, Iglewicz & Hoaglin 1993; spike points
    replaced by the mean of the non-spike points within m either side), with the shape test
    whorl documents in prepare::despike: points k..k+w-1 (w <= max_width) are a spike when
    the difference entering them and the one leaving them both exceed the threshold with
    opposite signs and the differences just outside are at most `quiet` times the smaller.
    Written from those descriptions, in NumPy."""
    y = np.asarray(y, dtype=float)
    n = len(y)
    if n < 4:
        return y.copy(), []
    d = np.diff(y)
    med = np.median(d)
    mad = np.median(np.abs(d - med))
    if mad > 0:
        z = 0.6745 * (d - med) / mad
    else:
        mean_ad = np.mean(np.abs(d - med))
        z = (d - med) / (np.sqrt(np.pi / 2) * mean_ad) if mean_ad > 0 else np.zeros_like(d)
    spike = np.zeros(n, dtype=bool)
    k = 1
    while k + 1 < n:
        width = None
        if abs(z[k - 1]) > threshold:
            for w in range(1, max_width + 1):
                out = k + w - 1
                if out >= len(d):
                    break
                if abs(z[out]) > threshold and np.sign(z[out]) != np.sign(z[k - 1]):
                    flank = min(abs(z[k - 1]), abs(z[out]))
                    before = abs(z[k - 2]) if k >= 2 else 0.0
                    after = abs(z[out + 1]) if out + 1 < len(d) else 0.0
                    if before <= quiet * flank and after <= quiet * flank:
                        width = w
                        break
        if width:
            spike[k:k + width] = True
            k += width
        else:
            k += 1
    out = y.copy()
    replaced = np.flatnonzero(spike)
    for i in replaced:
        window = np.arange(max(0, i - m), min(n, i + m + 1))
        keep = window[~spike[window]]
        if len(keep):
            out[i] = np.mean(y[keep])
    return out, replaced.tolist()


def check_despike(cases, results):
    # No reference library: the algorithm written in NumPy from the paper and whorl's
    # documented shape test. Deviation: cases whose replaced points differ, plus the largest
    # difference of the despiked values relative to the range of y.
    dev = 0.0
    for c, r in zip(cases, results):
        ref, idx = whitaker_hayes(c["y"], c["threshold"])
        if idx != r["replaced"]:
            dev += 1.0
        dev += float(np.max(np.abs(np.array(r["y"]) - ref)) / max(np.ptp(c["y"]), 1e-300))
    return len(cases), dev


CHECKS = [
    # (group, what is compared, source, check, tolerance on the deviation it returns)
    ("echo", "JSON inputs reach whorl bit for bit (values differing)", "Python json", check_echo, 0),
    ("cosine", "cosine vs a@b/(|a||b|), relative", NUMPY, check_cosine, 1e-6),
    ("pearson", "Pearson r vs scipy.stats.pearsonr", SCIPY, check_pearsonr, 1e-6),
    ("pearson", "Pearson r vs numpy.corrcoef", NUMPY, check_corrcoef, 1e-6),
    ("find_maxima", "peak indices, bases vs find_peaks (cases differing)", SCIPY, check_peak_indices, 0),
    ("find_maxima", "peak prominences vs peak_prominences", SCIPY, check_prominences, 1e-9),
    ("find_maxima", "half-prominence crossings vs peak_widths (samples)", SCIPY, check_widths, 1e-6),
    ("find_maxima", "area between the crossings vs numpy.trapezoid, / range", NUMPY, check_areas, 1e-6),
    ("asls", "ALS baseline vs Baseline().asls, / range of y", PYBASELINES, check_asls, 1e-6),
    ("rubber_band", "rubber band vs ConvexHull lower hull, / range", SCIPY, check_rubber_band, 1e-9),
    ("absorbance", "absorbance vs -numpy.log10(T)", NUMPY, check_absorbance, 1e-12),
    ("resample", "linear resampling vs numpy.interp, / range", NUMPY, check_resample, 1e-12),
    ("stein_scott", "Stein & Scott F_D vs NumPy weighted dot, relative", NUMPY, check_stein_scott, 1e-9),
    ("peak_overlap", "peak overlap count vs maximum_bipartite_matching", SCIPY, check_peak_overlap, 0),
    ("nnls", "NNLS solution vs scipy.optimize.nnls, / max(1, |x|)", SCIPY, check_nnls_x, 1e-9),
    ("nnls", "NNLS residual norm vs scipy.optimize.nnls, / |b|", SCIPY, check_nnls_residual, 1e-9),
    ("despike", "Whitaker-Hayes despiking, points and values / range", NUMPY, check_despike, 1e-12),
]


# ---------------------------------------------------------------------------------------------
# --mutate: disturb the first one or two cases of each group on the way to whorl only (the
# references still see the true inputs); every comparison must then fail.


def mutate(case, k):
    """A copy of `case` changed so that a correct whorl must disagree with the reference."""
    c = copy.deepcopy(case)
    op = c["op"]
    if op == "echo":
        c["values"][0] = float(np.nextafter(c["values"][0], np.inf))  # one unit in the last place
    elif op in ("cosine", "pearson"):
        c["a"][0] += 1e-2 * (max(c["a"]) - min(c["a"]))
    elif op == "find_maxima" and k == 0:
        y = c["y"]  # a new maximum on a rising sample changes the list of peaks
        i = next(i for i in range(1, len(y) - 1) if y[i - 1] < y[i] < y[i + 1])
        y[i] = y[i + 1] + 1.0
    elif op == "find_maxima":
        y = c["y"]  # a higher top changes the highest peak's prominence and half-height
        y[int(np.argmax(y))] += 1e-3 * (max(y) - min(y))
    elif op in ("asls", "rubber_band", "resample"):
        y = c["y"]
        y[int(np.argmin(y))] -= 1e-2 * (max(y) - min(y))
    elif op == "absorbance":
        c["t"][0] *= 1.001
    elif op == "stein_scott":
        c["unknown"][0][1] *= 1.01
    elif op == "peak_overlap":
        c["unknown"] = c["unknown"] + [c["reference"][0]]  # one more certain match
    elif op == "nnls":
        c["b"][0] += 1e-2 * (max(c["b"]) - min(c["b"]))  # a fit with a residual moves with b
    elif op == "despike":
        y = c["y"]  # one more spike, on the quietest stretch
        i = int(np.argmin(np.abs(np.diff(y[1:-2])))) + 2
        y[i] += 100.0 * (max(y) - min(y))
    return c


# ---------------------------------------------------------------------------------------------


def run_probe(probe, cases):
    cmd = [str(Path(probe).resolve())] if probe else ["cargo", "run", "--quiet", "--release", "--example", "numerics_probe"]
    request = json.dumps({"cases": cases})
    out = subprocess.run(cmd, input=request, capture_output=True, text=True, cwd=ROOT)
    if out.returncode != 0:
        sys.exit(f"probe failed ({' '.join(cmd)}):\n{out.stderr}")
    return json.loads(out.stdout)["results"]


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--probe", help="path of a built numerics_probe (default: cargo run --release)")
    ap.add_argument(
        "--mutate",
        action="store_true",
        help="disturb whorl's copy of one or two inputs per group and expect every comparison to FAIL",
    )
    args = ap.parse_args()

    groups = build_cases(np.random.default_rng(SEED))
    sent = {
        name: [mutate(c, k) if args.mutate and k < 2 else c for k, c in enumerate(cs)]
        for name, cs in groups.items()
    }
    flat = [c for cs in sent.values() for c in cs]
    results = iter(run_probe(args.probe, flat))
    by_group = {name: [next(results) for _ in cs] for name, cs in groups.items()}

    failed = 0
    for group, what, source, check, tol in CHECKS:
        n, dev = check(groups[group], by_group[group])
        ok = dev <= tol
        failed += not ok
        print(f"{'PASS' if ok else 'FAIL'}  {what:<54} {source:<18} n={n:<3} max dev {dev:<9.3g} tol {tol:g}")
    if args.mutate:
        print(f"mutate: {failed} of {len(CHECKS)} comparisons failed; all {len(CHECKS)} should")
        return 0 if failed == len(CHECKS) else 1
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
