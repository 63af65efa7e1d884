"""13C NMR peak lists of every compound, attached after the other tables."""

from ..base import COMPOUNDS, M, fail


# ---- 13C NMR peak lists ---------------------------------------------------
# Shifts in ppm (from memory; approximate, good to about 0.5 ppm), in CDCl3
# unless noted.  nC: equivalent carbons under the line.  kind "q" marks a
# carbon without attached H, which appears weaker in a broadband-decoupled
# spectrum (no NOE from attached protons, longer relaxation; common practice).
def c13(ppm, nC, kind, assign, mark=M):
    return {"ppm": ppm, "nC": nC, "kind": kind, "mark": mark, "assign": assign}


CARBON = {
    "methanol": ("CDCl3", [c13(50.4, 1, "h", "CH3O")]),
    "ethanol": ("CDCl3", [c13(58.3, 1, "h", "CH2O"), c13(18.4, 1, "h", "CH3")]),
    "1-propanol": ("CDCl3", [c13(64.4, 1, "h", "CH2O"), c13(25.9, 1, "h", "CH2"),
                             c13(10.2, 1, "h", "CH3")]),
    "2-propanol": ("CDCl3", [c13(64.3, 1, "h", "CHO"), c13(25.2, 2, "h", "CH3")]),
    "1-butanol": ("CDCl3", [c13(62.6, 1, "h", "CH2O"), c13(34.9, 1, "h", "CH2"),
                            c13(18.9, 1, "h", "CH2"), c13(13.8, 1, "h", "CH3")]),
    "acetone": ("CDCl3", [c13(207.1, 1, "q", "C=O"), c13(30.9, 2, "h", "CH3")]),
    "2-butanone": ("CDCl3", [c13(209.4, 1, "q", "C=O"), c13(36.9, 1, "h", "CH2"),
                             c13(29.4, 1, "h", "CH3CO"), c13(7.9, 1, "h", "CH3")]),
    "cyclohexanone": ("CDCl3", [c13(212.0, 1, "q", "C=O"), c13(42.0, 2, "h", "C2/C6"),
                                c13(27.1, 2, "h", "C3/C5"), c13(25.1, 1, "h", "C4")]),
    "acetophenone": ("CDCl3", [c13(198.1, 1, "q", "C=O"), c13(137.1, 1, "q", "ipso C"),
                               c13(133.1, 1, "h", "para CH"), c13(128.6, 2, "h", "meta CH"),
                               c13(128.3, 2, "h", "ortho CH"), c13(26.6, 1, "h", "CH3")]),
    "4-methyl-2-pentanone": ("CDCl3", [c13(208.9, 1, "q", "C=O"), c13(52.8, 1, "h", "CH2"),
                                       c13(30.4, 1, "h", "CH3CO"), c13(24.7, 1, "h", "CH"),
                                       c13(22.6, 2, "h", "(CH3)2")]),
    "propanal": ("CDCl3", [c13(202.8, 1, "h", "CHO"), c13(37.3, 1, "h", "CH2"),
                           c13(6.0, 1, "h", "CH3")]),
    "butanal": ("CDCl3", [c13(202.6, 1, "h", "CHO"), c13(45.8, 1, "h", "CH2CHO"),
                          c13(15.7, 1, "h", "CH2"), c13(13.7, 1, "h", "CH3")]),
    "benzaldehyde": ("CDCl3", [c13(192.4, 1, "h", "CHO"), c13(136.4, 1, "q", "ipso C"),
                               c13(134.5, 1, "h", "para CH"), c13(129.7, 2, "h", "ortho CH"),
                               c13(129.0, 2, "h", "meta CH")]),
    "acetic acid": ("CDCl3", [c13(177.0, 1, "q", "COOH"), c13(20.8, 1, "h", "CH3")]),
    "propanoic acid": ("CDCl3", [c13(181.2, 1, "q", "COOH"), c13(27.5, 1, "h", "CH2"),
                                 c13(8.9, 1, "h", "CH3")]),
    "butanoic acid": ("CDCl3", [c13(180.5, 1, "q", "COOH"), c13(36.1, 1, "h", "CH2CO"),
                                c13(18.4, 1, "h", "CH2"), c13(13.6, 1, "h", "CH3")]),
    "methyl acetate": ("CDCl3", [c13(171.4, 1, "q", "C=O"), c13(51.6, 1, "h", "OCH3"),
                                 c13(20.6, 1, "h", "CH3CO")]),
    "ethyl acetate": ("CDCl3", [c13(171.1, 1, "q", "C=O"), c13(60.5, 1, "h", "OCH2"),
                                c13(21.0, 1, "h", "CH3CO"), c13(14.2, 1, "h", "CH3")]),
    "butyl acetate": ("CDCl3", [c13(171.1, 1, "q", "C=O"), c13(64.4, 1, "h", "OCH2"),
                                c13(30.7, 1, "h", "CH2"), c13(21.0, 1, "h", "CH3CO"),
                                c13(19.2, 1, "h", "CH2"), c13(13.7, 1, "h", "CH3")]),
    "diethyl ether": ("CDCl3", [c13(65.9, 2, "h", "OCH2"), c13(15.3, 2, "h", "CH3")]),
    "tetrahydrofuran": ("CDCl3", [c13(68.0, 2, "h", "OCH2"), c13(25.7, 2, "h", "CH2")]),
    "1,4-dioxane": ("CDCl3", [c13(67.2, 4, "h", "OCH2")]),
    "methyl tert-butyl ether": ("CDCl3", [c13(72.7, 1, "q", "C(CH3)3"),
                                          c13(49.4, 1, "h", "OCH3"),
                                          c13(27.0, 3, "h", "C(CH3)3")]),
    "benzene": ("CDCl3", [c13(128.4, 6, "h", "CH")]),
    "toluene": ("CDCl3", [c13(137.9, 1, "q", "ipso C"), c13(129.1, 2, "h", "ortho CH"),
                          c13(128.3, 2, "h", "meta CH"), c13(125.4, 1, "h", "para CH"),
                          c13(21.5, 1, "h", "CH3")]),
    "ethylbenzene": ("CDCl3", [c13(144.3, 1, "q", "ipso C"), c13(128.4, 2, "h", "meta CH"),
                               c13(127.9, 2, "h", "ortho CH"), c13(125.7, 1, "h", "para CH"),
                               c13(28.9, 1, "h", "CH2"), c13(15.6, 1, "h", "CH3")]),
    "o-xylene": ("CDCl3", [c13(136.6, 2, "q", "C1/C2"), c13(129.6, 2, "h", "C3/C6"),
                           c13(125.9, 2, "h", "C4/C5"), c13(19.8, 2, "h", "CH3")]),
    "m-xylene": ("CDCl3", [c13(137.8, 2, "q", "C1/C3"), c13(130.0, 1, "h", "C2"),
                           c13(128.2, 1, "h", "C5"), c13(126.2, 2, "h", "C4/C6"),
                           c13(21.3, 2, "h", "CH3")]),
    "p-xylene": ("CDCl3", [c13(134.7, 2, "q", "C1/C4"), c13(129.1, 4, "h", "CH"),
                           c13(21.0, 2, "h", "CH3")]),
    "styrene": ("CDCl3", [c13(137.6, 1, "q", "ipso C"), c13(136.9, 1, "h", "CH="),
                          c13(128.5, 2, "h", "meta CH"), c13(127.8, 1, "h", "para CH"),
                          c13(126.2, 2, "h", "ortho CH"), c13(113.8, 1, "h", "=CH2")]),
    "chlorobenzene": ("CDCl3", [c13(134.3, 1, "q", "C-Cl"), c13(129.7, 2, "h", "meta CH"),
                                c13(128.6, 2, "h", "ortho CH"), c13(126.4, 1, "h", "para CH")]),
    "dichloromethane": ("CDCl3", [c13(53.5, 1, "h", "CH2Cl2")]),
    # In CDCl3 the CHCl3 line would sit on the solvent's own triplet, so DMSO-d6.
    "chloroform": ("DMSO-d6", [c13(79.2, 1, "h", "CHCl3")]),
    "1,2-dichloroethane": ("CDCl3", [c13(43.5, 2, "h", "CH2Cl")]),
    "trichloroethylene": ("CDCl3", [c13(124.5, 1, "q", "=CCl2"), c13(116.9, 1, "h", "=CHCl")]),
    "n-hexane": ("CDCl3", [c13(31.7, 2, "h", "C3/C4"), c13(22.7, 2, "h", "C2/C5"),
                           c13(14.1, 2, "h", "CH3")]),
    "n-heptane": ("CDCl3", [c13(32.0, 2, "h", "C3/C5"), c13(29.1, 1, "h", "C4"),
                            c13(22.8, 2, "h", "C2/C6"), c13(14.1, 2, "h", "CH3")]),
    "cyclohexane": ("CDCl3", [c13(27.0, 6, "h", "CH2")]),
    "acetonitrile": ("CDCl3", [c13(116.4, 1, "q", "C#N"), c13(1.9, 1, "h", "CH3")]),
    "N,N-dimethylformamide": ("CDCl3", [c13(162.6, 1, "h", "CHO"), c13(36.5, 1, "h", "NCH3 (E)"),
                                        c13(31.4, 1, "h", "NCH3 (Z)")]),
    "pyridine": ("CDCl3", [c13(149.9, 2, "h", "C2/C6"), c13(135.9, 1, "h", "C4"),
                           c13(123.7, 2, "h", "C3/C5")]),
    "aniline": ("CDCl3", [c13(146.4, 1, "q", "C-N"), c13(129.3, 2, "h", "meta CH"),
                          c13(118.6, 1, "h", "para CH"), c13(115.2, 2, "h", "ortho CH")]),
    "phenol": ("CDCl3", [c13(155.0, 1, "q", "C-O"), c13(129.7, 2, "h", "meta CH"),
                         c13(121.0, 1, "h", "para CH"), c13(115.3, 2, "h", "ortho CH")]),
    "nitrobenzene": ("CDCl3", [c13(148.3, 1, "q", "C-NO2"), c13(134.7, 1, "h", "para CH"),
                               c13(129.4, 2, "h", "meta CH"), c13(123.5, 2, "h", "ortho CH")]),
}


def attach_carbon_tables():
    """Adds each compound's 13C table as `nmr_13c` (after the other tables)."""
    for c in COMPOUNDS:
        if c["name"] not in CARBON:
            fail(f"{c['name']}: no 13C table")
        solvent, signals = CARBON[c["name"]]
        c["nmr_13c"] = {"solvent": solvent, "signals": signals}
    extra = set(CARBON) - {c["name"] for c in COMPOUNDS}
    if extra:
        fail(f"13C tables for unknown compounds: {sorted(extra)}")
