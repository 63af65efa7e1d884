#!/usr/bin/env python3
"""Checks that the evaluation's line shapes agree with the seed generator's.

`examples/evaluate` synthesises its degraded unknowns with Rust copies of the generator's line
shapes and noise-free spectra (`examples/evaluate/shapes.rs`). Its `--print-shapes` mode prints
them for a range of inputs as JSON; this script recomputes every value with the generator's own
functions (`scripts/seedgen/synthesis.py`) and compares. Standard library only.

    cargo build --example evaluate
    python3 scripts/check_line_shapes.py --probe target/debug/examples/evaluate
    python3 scripts/check_line_shapes.py --probe target/debug/examples/evaluate --mutate
    cargo run --example evaluate -- --print-shapes | python3 scripts/check_line_shapes.py

Prints one line per group and exits 1 when any value differs by more than 1e-9 relative (the
two sides compute in the same order up to the rounding of constants such as ln 2). With
`--mutate`, each of the generator's shapes is perturbed in turn (by 0.1 % or less) and the
comparison must fail for the groups that use it; exits 1 when a perturbation goes unnoticed.
"""

import argparse
import json
import os
import subprocess
import sys

sys.dont_write_bytecode = True
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

import seedgen.tables  # noqa: E402,F401  (fills COMPOUNDS)
from seedgen import synthesis as syn  # noqa: E402
from seedgen.base import COMPOUNDS  # noqa: E402

REL = 1e-9
ABS = 1e-12


class Group:
    """One group of compared values: how many, the largest difference, what failed first."""

    def __init__(self, name):
        self.name, self.n, self.worst, self.first_bad = name, 0, 0.0, None

    def same(self, what, ours, theirs):
        if len(ours) != len(theirs):
            self.first_bad = self.first_bad or f"{what}: {len(ours)} values here, {len(theirs)} in Rust"
            return
        for a, b in zip(ours, theirs):
            self.n += 1
            d = abs(a - b)
            self.worst = max(self.worst, d)
            if d > REL * max(abs(a), abs(b)) + ABS and self.first_bad is None:
                self.first_bad = f"{what}: generator {a!r}, Rust {b!r}"

    @property
    def ok(self):
        return self.first_bad is None and self.n > 0


def by_name():
    return {c["name"]: c for c in COMPOUNDS}


def compare(shapes):
    """Every group of the printout against the generator; returns the groups."""
    compounds = by_name()
    groups = {k: Group(k) for k in
              ("peaks", "h_lines", "multiplets", "ir", "raman", "fluorescence", "nmr")}
    for p in shapes["peaks"]:
        x, x0, w = p["x"], p["x0"], p["w"]
        groups["peaks"].same(f"peak shapes at x={x}, x0={x0}, w={w}",
                             [syn.lorentz(x, x0, w), syn.gauss(x, x0, w), syn.pvoigt(x, x0, w)],
                             [p["lorentz"], p["gauss"], p["pvoigt"]])

    def flat(lines):
        return [v for line in lines for v in line]

    seen = set()
    for e in shapes["h_lines"]:
        sig = compounds[e["compound"]]["nmr_1h"]["signals"][e["index"]]
        seen.add((e["compound"], e["index"]))
        groups["h_lines"].same(f"1H lines of {e['compound']} signal {e['index']}",
                               flat(syn.nmr_lines(sig)), flat(e["lines"]))
    want = {(c["name"], i) for c in COMPOUNDS for i in range(len(c["nmr_1h"]["signals"]))}
    if seen != want:
        groups["h_lines"].first_bad = f"signals printed differ from the tables: {sorted(want ^ seen)[:5]}"
    mults = set()
    for e in shapes["multiplets"]:
        mults.add(e["signal"]["mult"])
        groups["multiplets"].same(f"1H lines of {e['signal']}",
                                  flat(syn.nmr_lines(e["signal"])), flat(e["lines"]))
    if mults != set(syn.MULT_LINES) | {"m", "br"}:
        groups["multiplets"].first_bad = f"multiplicities printed: {sorted(mults)}"

    names = set()
    for e in shapes["ir"]:
        names.add(e["compound"])
        bands = compounds[e["compound"]]["ir"]["bands"]
        groups["ir"].same(f"IR of {e['compound']}, shift {e['shift']}",
                          syn.ir_absorbance(bands, shift=e["shift"]), e["y"])
    for e in shapes["raman"]:
        names.add(e["compound"])
        bands = compounds[e["compound"]]["raman"]["bands"]
        groups["raman"].same(f"Raman of {e['compound']}, shift {e['shift']}",
                             syn.raman_signal(bands, shift=e["shift"]), e["y"])
    for e in shapes["fluorescence"]:
        groups["fluorescence"].same(f"fluorescence of scale {e['scale']}",
                                    syn.fluorescence(e["scale"]), e["y"])
    solvents = set()
    for e in shapes["nmr"]:
        names.add(e["compound"])
        solvents.add(e["solvent"])
        signals = compounds[e["compound"]]["nmr_1h"]["signals"]
        ys = syn.nmr_spectrum(signals, e["solvent"], shift=e["shift"], lw=e["lw"], noise_sd=0)
        groups["nmr"].same(f"1H spectrum of {e['compound']} in {e['solvent']}", ys, e["y"])
    if names != set(compounds):
        groups["ir"].first_bad = f"compounds printed differ from the tables: {sorted(names ^ set(compounds))}"
    if solvents != set(syn.SOLVENTS):
        groups["nmr"].first_bad = f"solvents printed: {sorted(solvents)}"
    return groups


def report(groups, quiet=False):
    for g in groups.values():
        if not quiet:
            state = "ok  " if g.ok else "FAIL"
            print(f"{state} {g.name:13s} {g.n:7d} values, largest difference {g.worst:.3g}"
                  + ("" if g.ok else f"; {g.first_bad}"))
    return all(g.ok for g in groups.values())


def mutations():
    """(what, groups that must fail, attribute of synthesis, replacement built from the original)."""
    def ir_narrow_window(orig):
        def ir(bands, shift=0.0, min_height=0.0):
            out = []
            for x in syn.IR_X:
                a = 0.0
                for b in bands:
                    if abs(x - b["pos"] - shift) < 4 * b["fwhm"]:
                        a += b["height"] * syn.pvoigt(x, b["pos"] + shift, b["fwhm"])
                out.append(a)
            return out
        return ir

    def wider_multiplets(orig):
        def lines(sig):
            return [(sig["ppm"] + (p - sig["ppm"]) * 1.001, a, w) for p, a, w in orig(sig)]
        return lines

    return [
        ("Lorentzian 0.1 % wider", {"peaks", "raman"}, "lorentz",
         lambda o: lambda x, x0, w: o(x, x0, w * 1.001)),
        ("Gaussian 0.1 % wider", {"peaks", "fluorescence"}, "gauss",
         lambda o: lambda x, x0, w: o(x, x0, w * 1.001)),
        ("pseudo-Voigt eta 0.601", {"peaks", "ir"}, "pvoigt",
         lambda o: lambda x, x0, w, eta=0.6: o(x, x0, w, eta + 0.001)),
        ("IR bands cut at 4 widths", {"ir"}, "ir_absorbance", ir_narrow_window),
        ("Raman without its last band", {"raman"}, "raman_signal",
         lambda o: lambda bands, shift=0.0: o(bands[:-1], shift)),
        ("fluorescence 0.1 % taller", {"fluorescence"}, "fluorescence",
         lambda o: lambda scale: o(scale * 1.001)),
        ("1H multiplets 0.1 % wider", {"h_lines", "multiplets"}, "nmr_lines", wider_multiplets),
        ("1H water peak area 0.1501", {"nmr"}, "nmr_spectrum",
         lambda o: lambda *a, **k: o(*a, **{**k, "water_area": 0.1501})),
    ]


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--probe", help="the evaluate example binary (else the JSON is read from stdin)")
    ap.add_argument("--mutate", action="store_true",
                    help="perturb each generator shape in turn; every perturbation must be caught")
    args = ap.parse_args()
    if args.probe:
        text = subprocess.run([args.probe, "--print-shapes"], check=True, capture_output=True,
                              text=True).stdout
    else:
        text = sys.stdin.read()
    shapes = json.loads(text)
    if not args.mutate:
        ok = report(compare(shapes))
        print("line shapes agree" if ok else "line shapes DIFFER between the generator and the evaluation")
        return 0 if ok else 1
    missed = 0
    for what, must_fail, attr, make in mutations():
        orig = getattr(syn, attr)
        setattr(syn, attr, make(orig))
        try:
            groups = compare(shapes)
        finally:
            setattr(syn, attr, orig)
        failed = {g.name for g in groups.values() if not g.ok}
        caught = must_fail <= failed
        missed += not caught
        print(f"{'caught' if caught else 'MISSED'} {what}: failed {sorted(failed)}, "
              f"expected at least {sorted(must_fail)}")
    n = len(mutations())
    print(f"mutate: {n - missed} of {n} perturbations caught; all {n} should be")
    return 1 if missed else 0


if __name__ == "__main__":
    sys.exit(main())
