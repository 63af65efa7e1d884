"""The checks the tables must pass before anything is written: identifiers, counts and
ranges, facts of the trade each entry is made to obey, solvent clearances and 13C tables. A
failed check raises DataError and nothing is generated."""

import re

from .base import (C, CARBON_GAP, CARBON_SOLVENTS, COMPOUNDS, M, META, MULT_LINES, ALL_MULTS,
                   SOLVENT_GAP, SOLVENTS, TMS_GAP, fail)
from .synthesis import IR_X, ir_absorbance


def cas_ok(cas):
    m = re.fullmatch(r"(\d{2,7})-(\d{2})-(\d)", cas)
    if not m:
        return False
    digits = m.group(1) + m.group(2)
    total = sum((i + 1) * int(d) for i, d in enumerate(reversed(digits)))
    return total % 10 == int(m.group(3))


def parse_formula(f):
    counts = {}
    for el, n in re.findall(r"([A-Z][a-z]?)(\d*)", f):
        counts[el] = counts.get(el, 0) + (int(n) if n else 1)
    return counts


NOMINAL = {"C": 12, "H": 1, "N": 14, "O": 16, "Cl": 35, "S": 32}


def check_tables():
    names = set()
    for c in COMPOUNDS:
        n = c["name"]
        meta = META[n]
        if n in names:
            fail(f"duplicate compound {n}")
        names.add(n)
        if c["cas"] and not cas_ok(c["cas"]):
            fail(f"{n}: CAS RN {c['cas']} has a wrong check digit")
        atoms = parse_formula(c["formula"])
        if atoms.get("H", 0) == 0:
            fail(f"{n}: no hydrogen, so no 1H NMR spectrum")
        mass = sum(NOMINAL[e] * k for e, k in atoms.items())

        ir = c["ir"]["bands"]
        ra = c["raman"]["bands"]
        ms = c["ms"]["peaks"]
        sigs = c["nmr_1h"]["signals"]
        if not 6 <= len(ir) <= 15:
            fail(f"{n}: {len(ir)} IR bands (want 6-15)")
        if not 5 <= len(ra) <= 12:
            fail(f"{n}: {len(ra)} Raman bands (want 5-12)")
        if not 6 <= len(ms) <= 15:
            fail(f"{n}: {len(ms)} EI ions (want 6-15)")
        for b in ir + ra:
            if b["mark"] not in (M, C):
                fail(f"{n}: bad mark {b['mark']}")
            if not 0 < b["height"] <= 1:
                fail(f"{n}: band height {b['height']} out of 0..1")
        for b in ir:
            if not 400 <= b["pos"] <= 4000:
                fail(f"{n}: IR band {b['pos']} out of range")
        for b in ra:
            if not 100 <= b["pos"] <= 3500:
                fail(f"{n}: Raman band {b['pos']} out of range")

        # --- IR facts of the trade
        co = meta["carbonyl"]
        if co:
            strong = [b for b in ir if 1650 <= b["pos"] <= 1760 and b["height"] >= 0.6]
            if not strong:
                fail(f"{n}: carbonyl compound without a strong C=O band")
            if co == "sat" and not any(1700 <= b["pos"] <= 1750 for b in strong):
                fail(f"{n}: saturated C=O band not within 1700-1750 cm-1")
            if co == "amide" and not any(1650 <= b["pos"] <= 1690 for b in strong):
                fail(f"{n}: amide C=O band not near 1670 cm-1")
            if co == "conj" and not any(1680 <= b["pos"] <= 1710 for b in strong):
                fail(f"{n}: conjugated C=O band not near 1685-1705 cm-1")
        else:
            for b in ir:
                if 1680 <= b["pos"] <= 1760 and b["height"] > 0.15:
                    fail(f"{n}: no C=O, yet IR band at {b['pos']} of height {b['height']}")
        is_acid = c["class"] == "carboxylic acid"
        broad_low = [b for b in ir if b["pos"] < 3000 and b["fwhm"] >= 150]
        if is_acid:
            lo = min(b["pos"] - b["fwhm"] / 2 for b in broad_low) if broad_low else 9999
            hi = max(b["pos"] + b["fwhm"] / 2 for b in ir if b["fwhm"] >= 150) if broad_low else 0
            if lo > 2500 or hi < 3000:
                fail(f"{n}: acid O-H envelope does not cover 2500 to above 3000 cm-1")
        elif broad_low:
            fail(f"{n}: broad band below 3000 cm-1 in a non-acid")
        if not is_acid and any(b["pos"] < 3000 and b["fwhm"] > 100 for b in ir):
            fail(f"{n}: non-acid with a band wider than 100 cm-1 below 3000 cm-1")

        # --- MS
        rels = [p["rel"] for p in ms]
        if rels.count(100) != 1 or max(rels) != 100:
            fail(f"{n}: EI table needs exactly one base peak of 100")
        mzs = [p["mz"] for p in ms]
        if len(set(mzs)) != len(mzs):
            fail(f"{n}: duplicate m/z")
        if max(mzs) > mass + 2 * atoms.get("Cl", 0) + 1:
            fail(f"{n}: m/z {max(mzs)} above molecular mass {mass}")
        has_ch3 = any("CH3" in s["assign"] for s in sigs)
        if has_ch3 and 15 not in mzs:
            fail(f"{n}: has CH3 but no m/z 15")

        # --- NMR
        solvent = c["nmr_1h"]["solvent"]
        if solvent not in SOLVENTS:
            fail(f"{n}: unknown solvent {solvent}")
        for s in sigs:
            if s["mult"] not in ALL_MULTS:
                fail(f"{n}: bad multiplicity {s['mult']}")
            if s["mult"] in MULT_LINES and s["mult"] != "s" and s["J_hz"] <= 0:
                fail(f"{n}: multiplet {s['mult']} without J")
            if s["mult"] == "s" and s["J_hz"] != 0:
                fail(f"{n}: singlet with J")
            if not 9.0 <= s["ppm"] <= 10.1 or "aldehyde" in c["class"]:
                pass
            else:
                fail(f"{n}: signal at {s['ppm']} ppm in the aldehyde window")
        check_solvent_clear(n, solvent, [s["ppm"] for s in sigs])
        if "aldehyde" in c["class"]:
            if not any(9.0 <= s["ppm"] <= 10.1 for s in sigs):
                fail(f"{n}: aldehyde H not in 9.0-10.1 ppm")
        nh_total = sum(s["nH"] for s in sigs)
        want = atoms["H"] - meta["exch_omitted"]
        if nh_total != want:
            fail(f"{n}: NMR integrates to {nh_total} H, formula wants {want}")
        if meta["exch_omitted"] and solvent not in ("CD3OD", "D2O"):
            fail(f"{n}: exchangeable H omitted in a non-exchanging solvent")
        check_carbon(c, atoms, meta)
    if len(COMPOUNDS) < 42:
        fail(f"only {len(COMPOUNDS)} compounds")
    check_trade_facts(COMPOUNDS)


def check_carbon(c, atoms, meta):
    n = c["name"]
    table = c["nmr_13c"]
    if table["solvent"] not in CARBON_SOLVENTS:
        fail(f"{n}: unknown 13C solvent {table['solvent']}")
    sigs = table["signals"]
    if sum(s["nC"] for s in sigs) != atoms.get("C", 0):
        fail(f"{n}: 13C table counts {sum(s['nC'] for s in sigs)} C, formula has {atoms.get('C', 0)}")
    for s in sigs:
        if not -10 <= s["ppm"] <= 250:
            fail(f"{n}: 13C shift {s['ppm']} outside -10..250 ppm")
        if s["kind"] not in ("q", "h") or s["mark"] not in (M, C):
            fail(f"{n}: bad 13C entry {s}")
        for centre, _, _ in CARBON_SOLVENTS[table["solvent"]]:
            if abs(s["ppm"] - centre) <= CARBON_GAP:
                fail(f"{n}: 13C line {s['ppm']} within {CARBON_GAP} ppm of the solvent at {centre}")
    shifts = [s["ppm"] for s in sigs]
    # Common practice: carbonyl carbons (ketone, aldehyde, acid, ester, amide) at 160-220 ppm.
    if meta["carbonyl"] and not any(160 <= p <= 220 for p in shifts):
        fail(f"{n}: carbonyl compound without a 13C line at 160-220 ppm")
    if not meta["carbonyl"] and any(160 <= p <= 220 for p in shifts):
        fail(f"{n}: 13C line at 160-220 ppm without a carbonyl")
    # Common practice: aromatic ring carbons at 110-160 ppm.
    if "aromatic" in c["class"] or c["class"] in ("phenol", "nitroaromatic", "heteroaromatic amine"):
        if sum(s["nC"] for s in sigs if 110 <= s["ppm"] <= 160) < 5:
            fail(f"{n}: aromatic compound with fewer than 5 ring carbons at 110-160 ppm")
    # Common practice: saturated alkane carbons below 60 ppm.
    if c["class"] in ("alkane", "cycloalkane") and any(p >= 60 for p in shifts):
        fail(f"{n}: alkane carbon at or above 60 ppm")


def check_solvent_clear(name, solvent, ppms):
    residual, water = SOLVENTS[solvent]
    for p in ppms:
        for ref in (residual, water):
            if ref is not None and abs(p - ref) <= SOLVENT_GAP:
                fail(f"{name}: signal {p} ppm within {SOLVENT_GAP} of {solvent} peak {ref}")
        if abs(p) <= TMS_GAP:
            fail(f"{name}: signal {p} ppm too close to TMS")


# ---------------------------------------------------------------------------
# Facts of the trade checked by class of compound (the class written in the
# tables), each with its source. They look only at the tables and at the
# noise-free spectra synthesised from them.
# ---------------------------------------------------------------------------
def has_carbonyl(cls):
    return any(k in cls for k in ("ketone", "aldehyde", "ester", "acid", "amide"))


def saturated_carbonyl(cls):
    return cls in ("ketone", "aldehyde", "ester", "carboxylic acid")


def check_carbonyl_window(compounds):
    # Common practice: a strong C=O stretch of saturated ketones, aldehydes, esters and
    # carboxylic acids lies at 1700-1750 cm-1; compounds without C=O show no strong band there.
    for c in compounds:
        n, cls, bands = c["name"], c["class"], c["ir"]["bands"]
        strong_co = any(1700 <= b["pos"] <= 1750 and b["height"] >= 0.6 for b in bands)
        in_window = any(1680 <= b["pos"] <= 1760 and b["height"] > 0.15 for b in bands)
        if saturated_carbonyl(cls) and not strong_co:
            fail(f"{n} ({cls}) lacks a strong C=O band at 1700-1750 cm-1")
        if not has_carbonyl(cls) and in_window:
            fail(f"{n} ({cls}) has a strong band in the C=O window 1680-1760 cm-1")


def check_acid_oh(compounds):
    # Common practice: the H-bonded O-H stretch of a carboxylic acid is a broad band from
    # about 2500 to above 3000 cm-1; other classes do not absorb broadly below 2800 cm-1.
    # Checked on the synthesised absorbance (the reference spectra add noise of sd 0.002).
    for c in compounds:
        n, cls = c["name"], c["class"]
        a = dict(zip(IR_X, ir_absorbance(c["ir"]["bands"])))
        if cls == "carboxylic acid":
            below = [a[2500 + 50 * i] for i in range(12)]
            if not all(v >= 0.15 for v in below):
                fail(f"{n}: acid O-H absorbance at 2500-3050 cm-1 falls below 0.15: {below}")
        elif any(a[x] >= 0.15 for x in (2500, 2600, 2700)):
            fail(f"{n} ({cls}) absorbs broadly at 2500-2700 cm-1")


# Compounds whose alkyl chain ends in a CH3.
CHAIN_ENDS = ("1-propanol", "1-butanol", "butanal", "butanoic acid", "butyl acetate",
              "n-hexane", "n-heptane")


def check_chain_methyl_and_aldehyde_h(compounds):
    # Common practice: a CH3 at the end of an alkyl chain appears near 0.9-1.0 ppm; an aldehyde
    # H near 9-10 ppm, and nothing else of these compounds does.
    missing = set(CHAIN_ENDS) - {c["name"] for c in compounds}
    if missing:
        fail(f"chain-end compounds not in the tables: {sorted(missing)}")
    for c in compounds:
        n, cls = c["name"], c["class"]
        shifts = [s["ppm"] for s in c["nmr_1h"]["signals"]]
        if n in CHAIN_ENDS and not any(0.85 <= p <= 1.05 for p in shifts):
            fail(f"{n}: no chain-end CH3 at 0.85-1.05 ppm in {shifts}")
        if any(9.0 <= p <= 10.1 for p in shifts) != ("aldehyde" in cls):
            fail(f"{n} ({cls}): an H at 9.0-10.1 ppm if and only if an aldehyde, got {shifts}")


def check_trade_facts(compounds):
    check_carbonyl_window(compounds)
    check_acid_oh(compounds)
    check_chain_methyl_and_aldehyde_h(compounds)
