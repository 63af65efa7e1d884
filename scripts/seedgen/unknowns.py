"""The example unknowns: library compounds degraded as real measurements are, some in
formats that exercise the reader."""

import csv
import io
import os

from .base import COMPOUNDS, fail
from .checks import check_solvent_clear
from .output import carbon_rows, header_comments, ir_rows, percent, rows_text, write_text
from .synthesis import (IR_X, NMR_X, RAMAN_X, carbon_lines, fluorescence, fmt, ir_absorbance,
                        lorentz, nmr_spectrum, raman_counts, rng_for)


def by_name(name):
    for c in COMPOUNDS:
        if c["name"] == name:
            return c
    fail(f"no compound {name}")


def unknown_comments(uid, tech, extra=()):
    return header_comments([f"unknown sample {uid}", f"technique: {tech}", *extra])


def write_unknowns(out):
    ud = os.path.join(out, "unknowns")
    rows = []

    def add(fname, tech, expected, text, solvent, y_unit, x_unit, degr):
        by_name(expected)
        write_text(os.path.join(ud, fname), text)
        rows.append([fname, tech, expected, solvent, y_unit, x_unit, ";".join(degr)])

    # ---- IR (a): noise 0.01, sloping baseline 0 -> 0.08, x shift +3
    def ir_noisy(name, uid, degr_extra=()):
        c = by_name(name)
        r = rng_for("unknown", uid)
        ys = ir_absorbance(c["ir"]["bands"], shift=3)
        n = len(IR_X)
        ys = [y + 0.08 * i / (n - 1) + r.gauss(0, 0.01) for i, y in enumerate(ys)]
        return (unknown_comments(uid, "ir") +
                rows_text(["wavenumber_cm-1", "absorbance"], ir_rows(ys)))

    degr_a = ["noise sd 0.01 absorbance", "sloping baseline 0 to 0.08 (4000 to 400 cm-1)",
              "x shift +3 cm-1"]
    add("u01.ir.csv", "ir", "ethyl acetate", ir_noisy("ethyl acetate", "u01"),
        "", "absorbance", "cm-1", degr_a)

    # ---- IR (b): same family (an ester) as percent transmittance
    c = by_name("methyl acetate")
    r = rng_for("unknown", "u02")
    ys = ir_absorbance(c["ir"]["bands"])
    ts = [100.0 * 10 ** (-(y + r.gauss(0, 0.004))) for y in ys]
    add("u02.ir.csv", "ir", "methyl acetate",
        unknown_comments("u02", "ir", ["y is percent transmittance, T% = 100*10^-A"]) +
        rows_text(["wavenumber_cm-1", "transmittance_percent"],
                  [(str(x), fmt(t, 5, 3)) for x, t in zip(IR_X, ts)]),
        "", "transmittance_percent", "cm-1",
        ["percent transmittance instead of absorbance", "noise sd 0.004 absorbance before conversion"])

    # ---- IR (c): weak peaks removed, semicolon delimiter, decimal comma
    c = by_name("toluene")
    r = rng_for("unknown", "u03")
    ys = ir_absorbance(c["ir"]["bands"], min_height=0.15)
    ys = [y + r.gauss(0, 0.003) for y in ys]
    rows_c = [(f"{x:.1f}".replace(".", ","), fmt(y, 5, 4).replace(".", ","))
              for x, y in zip(IR_X, ys)]
    add("u03.ir.csv", "ir", "toluene",
        unknown_comments("u03", "ir", ["semicolon-delimited, decimal comma"]) +
        rows_text(["wavenumber_cm-1", "absorbance"], rows_c, delim=";"),
        "", "absorbance", "cm-1",
        ["bands weaker than 0.15 absorbance missing", "noise sd 0.003 absorbance",
         "semicolon delimiter", "decimal comma"])

    # ---- IR (d): a carboxylic acid; (e): an aldehyde
    add("u04.ir.csv", "ir", "propanoic acid", ir_noisy("propanoic acid", "u04"),
        "", "absorbance", "cm-1", degr_a)
    c = by_name("butanal")
    r = rng_for("unknown", "u05")
    ys = ir_absorbance(c["ir"]["bands"], shift=-2)
    ys = [0.85 * y + 0.02 + r.gauss(0, 0.006) for y in ys]
    add("u05.ir.csv", "ir", "butanal",
        unknown_comments("u05", "ir") +
        rows_text(["wavenumber_cm-1", "absorbance"], ir_rows(ys)),
        "", "absorbance", "cm-1",
        ["intensity x0.85", "flat offset 0.02 absorbance", "noise sd 0.006 absorbance",
         "x shift -2 cm-1"])

    # ---- Raman: fluorescence baseline + noise + shift +2
    c = by_name("styrene")
    r = rng_for("unknown", "u06")
    cs = raman_counts(c["raman"]["bands"], r, peak=6000, shift=2, baseline=fluorescence(9000))
    add("u06.raman.csv", "raman", "styrene",
        unknown_comments("u06", "raman") +
        rows_text(["raman_shift_cm-1", "counts"], [(str(x), str(y)) for x, y in zip(RAMAN_X, cs)]),
        "", "counts", "cm-1",
        ["fluorescence-like rising baseline up to ~10000 counts", "shot noise",
         "x shift +2 cm-1", "peak height ~6000 counts"])

    c = by_name("chloroform")
    r = rng_for("unknown", "u07")
    cs = raman_counts(c["raman"]["bands"], r, peak=4000, offset=350)
    add("u07.raman.txt", "raman", "chloroform",
        unknown_comments("u07", "raman", ["tab-delimited"]) +
        rows_text(["raman_shift_cm-1", "counts"], [(str(x), str(y)) for x, y in zip(RAMAN_X, cs)],
                  delim="\t"),
        "", "counts", "cm-1",
        ["tab delimiter", "lower signal (~4000 counts)", "offset 350 counts", "shot noise"])

    c = by_name("p-xylene")
    r = rng_for("unknown", "u08")
    cs = raman_counts(c["raman"]["bands"], r, peak=1500, shift=2, baseline=fluorescence(4000))
    add("u08.raman.csv", "raman", "p-xylene",
        unknown_comments("u08", "raman") +
        rows_text(["raman_shift_cm-1", "counts"], [(str(x), str(y)) for x, y in zip(RAMAN_X, cs)]),
        "", "counts", "cm-1",
        ["weak signal (~1500 counts)", "fluorescence-like rising baseline up to ~4500 counts",
         "shot noise", "x shift +2 cm-1"])

    # ---- MS
    def ms_degraded(name, uid, extra):
        c = by_name(name)
        r = rng_for("unknown", uid)
        peaks = [(p["mz"], p["rel"] * r.uniform(0.9, 1.1))
                 for p in c["ms"]["peaks"] if p["rel"] >= 5]
        peaks += extra
        merged = {}
        for mz, v in peaks:
            merged[mz] = merged.get(mz, 0) + v
        top = max(merged.values())
        return [(mz, percent(100 * v / top)) for mz, v in sorted(merged.items())]

    pk = ms_degraded("ethylbenzene", "u09", [(207, 24.0), (281, 17.0)])
    add("u09.ms-ei.csv", "ms-ei", "ethylbenzene",
        unknown_comments("u09", "ms-ei") +
        rows_text(["mz", "intensity"], [(str(m), str(i)) for m, i in pk]),
        "", "relative", "",
        ["ions below 5 % removed", "intensity noise +-10 %",
         "column-bleed-like ions m/z 207 and 281 added"])

    pk = ms_degraded("dichloromethane", "u10", [])
    text = (unknown_comments("u10", "ms-ei", ["whitespace-delimited"]) +
            "mz    intensity\n" + "".join(f"{m:<6d}{i}\n" for m, i in pk))
    add("u10.ms-ei.txt", "ms-ei", "dichloromethane", text, "", "relative", "",
        ["whitespace delimiter", "ions below 5 % removed", "intensity noise +-10 %"])

    pk = ms_degraded("cyclohexanone", "u11", [(28, 45.0), (32, 12.0)])
    add("u11.ms-ei.csv", "ms-ei", "cyclohexanone",
        unknown_comments("u11", "ms-ei") +
        rows_text(["mz", "intensity"], [(str(m), str(i)) for m, i in pk]),
        "", "relative", "",
        ["ions below 5 % removed", "intensity noise +-10 %", "air background m/z 28 and 32 added"])

    # ---- NMR
    def nmr_unknown(name, uid, solvent, shift, noise_frac, lw=0.006, ascending=False):
        c = by_name(name)
        ppms = [s["ppm"] + shift for s in c["nmr_1h"]["signals"]]
        check_solvent_clear(f"{name} ({uid})", solvent, ppms)
        r = rng_for("unknown", uid)
        ys = nmr_spectrum(c["nmr_1h"]["signals"], solvent, shift=shift, lw=lw,
                          noise_sd=0, rng=None)
        ys = [y + r.gauss(0, 1000.0 * noise_frac) for y in ys]
        rows = [(f"{x:.3f}", fmt(y, 5, 3)) for x, y in zip(NMR_X, ys)]
        if ascending:
            rows.reverse()
        return (unknown_comments(uid, "nmr-1h", [f"solvent: {solvent}, 400 MHz"]) +
                rows_text(["ppm", "intensity"], rows))

    add("u12.nmr-1h.csv", "nmr-1h", "diethyl ether",
        nmr_unknown("diethyl ether", "u12", "acetone-d6", 0.01, 0.01),
        "acetone-d6", "intensity", "",
        ["noise 1 % of max", "shift +0.01 ppm",
         "run in acetone-d6 (reference in CDCl3): other residual and water peaks"])

    add("u13.nmr-1h.csv", "nmr-1h", "1-butanol",
        nmr_unknown("1-butanol", "u13", "CD3OD", 0.0, 0.003, ascending=True),
        "CD3OD", "intensity", "",
        ["ascending ppm order", "noise 0.3 % of max"])

    add("u14.nmr-1h.csv", "nmr-1h", "benzaldehyde",
        nmr_unknown("benzaldehyde", "u14", "CDCl3", 0.01, 0.01, lw=0.012),
        "CDCl3", "intensity", "",
        ["noise 1 % of max", "shift +0.01 ppm", "lines broadened to 0.012 ppm (poor shim)"])

    add("u15.nmr-1h.csv", "nmr-1h", "nitrobenzene",
        nmr_unknown("nitrobenzene", "u15", "DMSO-d6", 0.01, 0.01),
        "DMSO-d6", "intensity", "",
        ["noise 1 % of max", "shift +0.01 ppm",
         "run in DMSO-d6 (reference in CDCl3): other residual and water peaks"])

    # ---- 13C: a peak list with shift scatter, no intensities and the weak C=O
    # line missing; and a profile spectrum instead of a peak list
    c = by_name("2-butanone")
    r = rng_for("unknown", "u16")
    lines = [l for l in carbon_lines(c, jitter=lambda: r.gauss(0, 0.25)) if l[0] < 200]
    add("u16.nmr-13c.csv", "nmr-13c", "2-butanone",
        unknown_comments("u16", "nmr-13c", ["solvent: CDCl3, 100.6 MHz, peak list"]) +
        rows_text(["ppm", "intensity"], carbon_rows(lines, unit_heights=True)),
        "CDCl3", "intensity", "",
        ["peak list without intensities (all 1)", "shift scatter sd 0.25 ppm",
         "weak C=O line missing", "solvent triplet and TMS listed"])

    c = by_name("acetophenone")
    r = rng_for("unknown", "u17")
    lines = carbon_lines(c, shift=0.2)
    xs = [round(220.0 - 0.05 * i, 2) for i in range(4601)]
    ys = []
    for x in xs:
        y = sum(h * lorentz(x, p, 0.1) for p, h in lines if abs(x - p) < 5)
        ys.append(y)
    top = max(ys)
    ys = [1000.0 * y / top + r.gauss(0, 4.0) for y in ys]
    add("u17.nmr-13c.csv", "nmr-13c", "acetophenone",
        unknown_comments("u17", "nmr-13c", ["solvent: CDCl3, 100.6 MHz, full spectrum"]) +
        rows_text(["ppm", "intensity"], [(f"{x:.2f}", fmt(y, 5, 2)) for x, y in zip(xs, ys)]),
        "CDCl3", "intensity", "",
        ["profile spectrum instead of a peak list (4601 points)", "referencing offset +0.2 ppm",
         "noise 0.4 % of max", "lines 0.1 ppm wide"])

    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["file", "technique", "expected", "solvent", "y_unit", "x_unit", "degradations"])
    w.writerows(rows)
    write_text(os.path.join(ud, "manifest.csv"), buf.getvalue())
    return rows
