"""Entry-mistake repairs: quantity-aware kinds and the chance of fitting by coincidence."""

from __future__ import annotations

import numpy as np

from pointsift.methods.repairs import KINDS_FOR, likely_slips, repair_candidates, repair_chance


def test_kinds_fit_the_quantity():
    assert "units" not in KINDS_FOR["concentration"] and "sign" not in KINDS_FOR["concentration"]
    assert "sign" not in KINDS_FOR["depth"]
    assert {k for _, k, _ in repair_candidates(12.5, KINDS_FOR["concentration"])} == {"decimal", "digits"}


def test_chance_matches_a_brute_force_count():
    rng = np.random.default_rng(12)
    values = np.round(rng.normal(50, 20, 60), 2)
    expected = values + rng.normal(0, 1.0, 60)
    scale = np.full(60, 1.0)
    sound = np.ones(60, bool)
    chance = repair_chance(values, expected, scale, sound, kinds=("decimal", "units", "digits", "sign"))
    # brute force, written out independently: a repair of a kind "fits" a value when the repaired value is
    # within 1.5 sd of the expected value and moves the value by at least 2 sd
    for kind in ("decimal", "units", "digits", "sign"):
        hits = 0
        for v, e in zip(values, expected):
            repaired = [r for r, k, _ in repair_candidates(float(v), (kind,))]
            if any(abs(r - e) <= 1.5 and abs(r - v) >= 2.0 for r in repaired):
                hits += 1
        assert chance[kind] == hits / 60, kind
    assert chance["points"] == 60


def test_a_repair_that_fits_often_by_chance_is_not_evidence():
    values = np.array([100.0, 28.53])
    expected = np.array([10.0, 285.3])
    scale = np.ones(2)
    candidates = np.ones(2, bool)
    fits, text = likely_slips(values, expected, scale, candidates, chance={"decimal": 0.2, "units": 0, "digits": 0, "sign": 0})
    assert not fits.any()
    assert "20% of this layer's sound values by chance: not counted" in text[0]
    fits, text = likely_slips(values, expected, scale, candidates, chance={"decimal": 0.002, "units": 0, "digits": 0, "sign": 0})
    assert fits.all() and "0.2% of this layer's sound values" in text[1]
