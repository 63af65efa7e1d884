"""Spectrum synthesis: line shapes, grids and the noise-free spectra of the tables, plus the
seeded generators. `examples/evaluate` re-implements the line shapes; `scripts/check_line_shapes.py`
checks that the two agree."""

import math
import random
import re
import zlib

from .base import C13_MHZ, CARBON_SOLVENTS, MULT_LINES, SOLVENTS


def slug(name):
    return re.sub(r"[^a-z0-9]+", "-", name.lower()).strip("-")


def rng_for(*parts):
    key = "|".join(str(p) for p in parts).encode()
    return random.Random(zlib.crc32(key))


def fmt(v, sig=5, maxdec=4):
    """At most `sig` significant digits and `maxdec` decimals, never exponent
    notation, trailing zeros stripped."""
    if v == 0 or not math.isfinite(v):
        return "0"
    mag = math.floor(math.log10(abs(v)))
    dec = max(0, min(maxdec, sig - 1 - mag))
    s = f"{v:.{dec}f}"
    if "." in s:
        s = s.rstrip("0").rstrip(".")
    if s in ("-0", ""):
        s = "0"
    return s


def lorentz(x, x0, w):
    d = (x - x0) / (w / 2)
    return 1.0 / (1.0 + d * d)


def gauss(x, x0, w):
    d = (x - x0) / w
    return math.exp(-4 * math.log(2) * d * d)


def pvoigt(x, x0, w, eta=0.6):
    return eta * lorentz(x, x0, w) + (1 - eta) * gauss(x, x0, w)


IR_X = [4000 - 2 * i for i in range(1801)]           # 4000 .. 400
RAMAN_X = [100 + 2 * i for i in range(1701)]         # 100 .. 3500
NMR_X = [(12500 - 4 * i) / 1000.0 for i in range(3251)]  # 12.5 .. -0.5


def ir_absorbance(bands, shift=0.0, min_height=0.0):
    use = [b for b in bands if b["height"] >= min_height]
    out = []
    for x in IR_X:
        a = 0.0
        for b in use:
            if abs(x - b["pos"] - shift) < 40 * b["fwhm"]:
                a += b["height"] * pvoigt(x, b["pos"] + shift, b["fwhm"])
        out.append(a)
    return out


def raman_signal(bands, shift=0.0):
    out = []
    for x in RAMAN_X:
        s = 0.0
        for b in bands:
            s += b["height"] * lorentz(x, b["pos"] + shift, b["fwhm"])
        out.append(s)
    return out


def nmr_lines(sig_):
    """Lines (ppm, area) of one first-order signal at 400 MHz."""
    ppm, nH, mult, J = sig_["ppm"], sig_["nH"], sig_["mult"], sig_["J_hz"]
    if mult == "br":
        return [(ppm, nH, 0.05)]
    if mult == "m":
        step = (J if J > 0 else 7.0) / 400.0 / 2
        weights = [1, 3, 4, 3, 1]
        offs = [-2, -1, 0, 1, 2]
    else:
        n = MULT_LINES[mult]
        weights = [math.comb(n - 1, k) for k in range(n)]
        step = J / 400.0
        offs = [k - (n - 1) / 2 for k in range(n)]
    tot = sum(weights)
    return [(ppm + o * step, nH * w / tot, 0.006) for o, w in zip(offs, weights)]


def nmr_spectrum(signals, solvent, shift=0.0, lw=0.006, noise_sd=0.3, rng=None,
                 water_area=0.15, residual_area=0.05, tms_area=0.12):
    lines = []
    for s in signals:
        for p, a, w in nmr_lines(s):
            lines.append((p + shift, a, max(w, lw)))
    residual, water = SOLVENTS[solvent]
    if residual is not None:
        lines.append((residual, residual_area, lw))
    lines.append((water, water_area, 0.02))
    lines.append((0.0, tms_area, lw))
    ys = []
    for x in NMR_X:
        y = 0.0
        for p, a, w in lines:
            d = x - p
            if abs(d) < 2.5:
                # area-normalised Lorentzian
                y += a * (w / (2 * math.pi)) / (d * d + (w / 2) ** 2)
        ys.append(y)
    top = max(ys)
    ys = [1000.0 * y / top for y in ys]
    if rng is not None and noise_sd > 0:
        ys = [y + rng.gauss(0, noise_sd) for y in ys]
    return ys


def fluorescence(scale):
    """A fluorescence-like background on the Raman grid: rising towards high shift, with a
    broad hump, about `scale` counts at most."""
    return [scale * (1 - math.exp(-(x - 100) / 1400.0)) + 0.15 * scale * gauss(x, 2600, 2500)
            for x in RAMAN_X]


def raman_counts(bands, rng, peak=10000.0, offset=200.0, shift=0.0, baseline=None):
    sig_ = raman_signal(bands, shift)
    top = max(sig_)
    out = []
    for i, s in enumerate(sig_):
        mean = offset + peak * s / top + (baseline[i] if baseline else 0.0)
        out.append(max(0, int(round(mean + rng.gauss(0, math.sqrt(mean))))))
    return out


def carbon_lines(c, shift=0.0, jitter=None, solvent_lines=True):
    """The 13C lines (ppm, relative height) of a compound's table: height nC, times 0.3 for
    a carbon without H (weaker: no NOE, slower relaxation; common practice); the solvent's
    C-D multiplet (binomial 2nI+1 pattern for I = 1 reduced to its line count, heights up
    to 0.6 of the tallest compound line) and TMS at 0 ppm."""
    lines = []
    for s in c["nmr_13c"]["signals"]:
        h = s["nC"] * (0.3 if s["kind"] == "q" else 1.0)
        p = s["ppm"] + shift + (jitter() if jitter else 0.0)
        lines.append((p, h))
    top = max(h for _, h in lines)
    if solvent_lines:
        for centre, mult, j in CARBON_SOLVENTS[c["nmr_13c"]["solvent"]]:
            weights = {1: [1], 3: [1, 1, 1], 7: [1, 3, 6, 7, 6, 3, 1]}[mult]
            for k, w in enumerate(weights):
                off = (k - (mult - 1) / 2) * j / C13_MHZ
                lines.append((centre + off, 0.6 * top * w / max(weights)))
        lines.append((0.0, 0.1 * top))
    return lines
