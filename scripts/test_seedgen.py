#!/usr/bin/env python3
"""Tests of the seed generator's own checks (standard library only; run in CI):

    python3 scripts/test_seedgen.py

Each fact-of-the-trade check passes on the tables and fails on a copy of them with one entry
moved out of the fact, so a check that cannot fail would show here.
"""

import copy
import os
import sys
import unittest

sys.dont_write_bytecode = True
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

import seedgen.tables  # noqa: E402,F401  (fills COMPOUNDS)
from seedgen.base import COMPOUNDS, DataError  # noqa: E402
from seedgen.checks import (check_acid_oh, check_carbonyl_window,  # noqa: E402
                            check_chain_methyl_and_aldehyde_h, check_tables)


def perturbed(name, change):
    """A deep copy of the tables with `change` applied to compound `name`."""
    tables = copy.deepcopy(COMPOUNDS)
    hits = [c for c in tables if c["name"] == name]
    assert len(hits) == 1, name
    change(hits[0])
    return tables


def bands_near(c, lo, hi):
    return [b for b in c["ir"]["bands"] if lo <= b["pos"] <= hi]


class TradeFacts(unittest.TestCase):
    def test_the_tables_pass_every_check(self):
        check_tables()

    def test_carbonyl_window_fails_for_a_ketone_without_its_band(self):
        def move(c):
            for b in bands_near(c, 1700, 1750):
                b["pos"] = 1650
        check_carbonyl_window(COMPOUNDS)
        with self.assertRaisesRegex(DataError, "acetone .* lacks a strong C=O"):
            check_carbonyl_window(perturbed("acetone", move))

    def test_carbonyl_window_fails_for_a_band_there_without_a_carbonyl(self):
        def add(c):
            c["ir"]["bands"].append({"pos": 1720, "height": 0.5, "fwhm": 15})
        with self.assertRaisesRegex(DataError, "n-hexane .* C=O window"):
            check_carbonyl_window(perturbed("n-hexane", add))

    def test_acid_oh_fails_for_an_acid_with_a_narrow_oh(self):
        def narrow(c):
            for b in c["ir"]["bands"]:
                if b["fwhm"] >= 150:
                    b["fwhm"] = 40
        check_acid_oh(COMPOUNDS)
        with self.assertRaisesRegex(DataError, "acetic acid: acid O-H"):
            check_acid_oh(perturbed("acetic acid", narrow))

    def test_acid_oh_fails_for_a_broad_band_in_another_class(self):
        def broaden(c):
            c["ir"]["bands"].append({"pos": 2600, "height": 0.3, "fwhm": 300})
        with self.assertRaisesRegex(DataError, "ethanol .* absorbs broadly"):
            check_acid_oh(perturbed("ethanol", broaden))

    def test_chain_end_methyl_fails_when_moved(self):
        def move(c):
            for s in c["nmr_1h"]["signals"]:
                if 0.85 <= s["ppm"] <= 1.05:
                    s["ppm"] = 1.20
        check_chain_methyl_and_aldehyde_h(COMPOUNDS)
        with self.assertRaisesRegex(DataError, "n-hexane: no chain-end CH3"):
            check_chain_methyl_and_aldehyde_h(perturbed("n-hexane", move))

    def test_aldehyde_h_fails_when_moved_out_or_given_to_another_class(self):
        def move(c):
            for s in c["nmr_1h"]["signals"]:
                if s["ppm"] > 9.0:
                    s["ppm"] = 8.5
        with self.assertRaisesRegex(DataError, "butanal .* if and only if"):
            check_chain_methyl_and_aldehyde_h(perturbed("butanal", move))

        def add(c):
            c["nmr_1h"]["signals"].append({"ppm": 9.5, "nH": 1, "mult": "s", "J_hz": 0})
        with self.assertRaisesRegex(DataError, "acetone .* if and only if"):
            check_chain_methyl_and_aldehyde_h(perturbed("acetone", add))


if __name__ == "__main__":
    unittest.main()
