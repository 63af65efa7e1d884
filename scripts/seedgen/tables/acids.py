"""Tables of the carboxylic acids: IR and Raman bands, EI ions, 1H signals."""

from ..base import C, M, acid_oh, band, compound, ion, sig


# ---- carboxylic acids -----------------------------------------------------
compound(
    "acetic acid", "C2H4O2", "64-19-7", "carboxylic acid", ["ethanoic acid", "glacial acetic acid"],
    ["solvent", "acid", "carbonyl", "voc"],
    ir=acid_oh() + [
        band(1710, 1.00, 30, C, "C=O stretch, saturated acid (dimer)"),
        band(1410, 0.50, 20, M, "C-O-H in-plane bend / CH3"),
        band(1295, 0.80, 25, M, "C-O stretch"),
        band(1015, 0.20, 15, M, "CH3 rock"),
        band(935, 0.40, 70, M, "O-H out-of-plane bend (dimer)"),
        band(620, 0.40, 30, M, "O-C=O bend"),
        band(480, 0.30, 25, M, "skeletal bend")],
    raman=[band(2944, 0.80, 20, M, "CH3 stretch"),
           band(1665, 0.35, 30, M, "C=O stretch (H-bonded dimer)"),
           band(1430, 0.30, 20, M, "CH3 deformation"),
           band(893, 1.00, 10, M, "C-C stretch"),
           band(624, 0.30, 14, M, "O-C=O bend"),
           band(448, 0.30, 14, M, "skeletal bend")],
    ms=[ion(43, 100), ion(45, 90), ion(60, 75), ion(15, 20, C), ion(42, 15),
        ion(29, 5), ion(28, 5), ion(14, 5)],
    solvent="CDCl3",
    nmr=[sig(11.50, 1, "br", 0, M, "COOH (exchangeable)"),
         sig(2.10, 3, "s", 0, M, "CH3CO")],
    carbonyl="sat", exch=1)

compound(
    "propanoic acid", "C3H6O2", "79-09-4", "carboxylic acid", ["propionic acid"],
    ["acid", "carbonyl", "preservative"],
    ir=acid_oh() + [
        band(2985, 0.30, 25, M, "CH3 asym. stretch"),
        band(2948, 0.20, 20, M, "CH2 stretch"),
        band(1712, 1.00, 30, C, "C=O stretch, saturated acid (dimer)"),
        band(1465, 0.40, 18, M, "CH3/CH2 deformation"),
        band(1415, 0.40, 20, M, "C-O-H in-plane bend"),
        band(1380, 0.20, 15, M, "CH3 umbrella"),
        band(1240, 0.60, 25, M, "C-O stretch"),
        band(1080, 0.20, 15, M, "C-C stretch"),
        band(935, 0.35, 70, M, "O-H out-of-plane bend (dimer)"),
        band(845, 0.15, 12, M, "C-C stretch / CH3 rock"),
        band(650, 0.25, 25, M, "O-C=O bend")],
    raman=[band(2985, 0.60, 20, C, "CH3 asym. stretch"),
           band(2945, 1.00, 20, C, "C-H stretch"),
           band(1660, 0.30, 30, M, "C=O stretch (H-bonded dimer)"),
           band(1440, 0.30, 20, C, "CH3/CH2 deformation"),
           band(1080, 0.20, 14, M, "C-C stretch"),
           band(840, 0.60, 12, M, "C-C-C stretch")],
    ms=[ion(74, 100), ion(28, 90), ion(29, 85, C), ion(45, 75), ion(27, 50),
        ion(73, 30), ion(57, 28), ion(26, 12), ion(15, 5, C)],
    solvent="CDCl3",
    nmr=[sig(11.70, 1, "br", 0, M, "COOH (exchangeable)"),
         sig(2.38, 2, "q", 7.5, M, "CH2CO"),
         sig(1.17, 3, "t", 7.5, M, "CH3 of ethyl next to C=O")],
    carbonyl="sat", exch=1)

compound(
    "butanoic acid", "C4H8O2", "107-92-6", "carboxylic acid", ["butyric acid"],
    ["acid", "carbonyl", "odour"],
    ir=acid_oh() + [
        band(2966, 0.30, 25, M, "CH3 asym. stretch"),
        band(2878, 0.20, 20, M, "CH3/CH2 sym. stretch"),
        band(1710, 1.00, 30, C, "C=O stretch, saturated acid (dimer)"),
        band(1460, 0.35, 18, M, "CH2/CH3 deformation"),
        band(1415, 0.40, 20, M, "C-O-H in-plane bend"),
        band(1285, 0.35, 20, M, "C-O stretch / CH2 wag"),
        band(1220, 0.55, 25, M, "C-O stretch"),
        band(1095, 0.20, 15, M, "C-C stretch"),
        band(935, 0.35, 70, M, "O-H out-of-plane bend (dimer)")],
    raman=[band(2965, 0.70, 20, C, "CH3 asym. stretch"),
           band(2935, 1.00, 20, C, "CH2 stretch"),
           band(2878, 0.60, 20, C, "CH3 sym. stretch"),
           band(1660, 0.30, 30, M, "C=O stretch (H-bonded dimer)"),
           band(1450, 0.35, 20, C, "CH2/CH3 deformation"),
           band(900, 0.30, 12, M, "C-C stretch"),
           band(860, 0.25, 12, M, "C-C stretch")],
    ms=[ion(60, 100), ion(73, 30), ion(27, 25), ion(41, 20), ion(42, 20),
        ion(43, 20), ion(45, 15), ion(29, 10, C), ion(39, 10), ion(55, 5),
        ion(88, 2), ion(15, 3, C)],
    solvent="acetone-d6",
    nmr=[sig(11.00, 1, "br", 0, M, "COOH (exchangeable)"),
         sig(2.28, 2, "t", 7.3, M, "CH2CO"),
         sig(1.64, 2, "sext", 7.4, M, "CH2CH3"),
         sig(0.95, 3, "t", 7.4, C, "CH3 on alkyl chain")],
    carbonyl="sat", exch=1)
