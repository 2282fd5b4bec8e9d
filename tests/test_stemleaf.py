"""Stem-and-leaf displays against hand-worked small examples.

Every expected display below was worked out by hand from the construction in
Tukey (1977, *Exploratory Data Analysis*, ch. 1): round to the leaf unit, the
last digit is the leaf, the rest the stem, negative values on their own stems
(including -0).
"""

import math

import numpy as np
import pytest

from pointsift.errors import ConfigError, InputError
from pointsift.methods.stemleaf import stem_and_leaf, stem_and_leaf_table


def _rows(display):
    return [(ln.stem, ln.leaf_low, ln.leaf_high, ln.leaves) for ln in display.lines]


def test_decimals_hand_worked_text():
    # Hand-worked: leaf unit 0.1; 1.2 -> 12, 1.5 -> 15, 2.3 -> 23, 3.05 -> 31 (half away from zero), 0.7 -> 7.
    text = stem_and_leaf([1.2, 1.5, 2.3, 2.3, 3.05, 0.7], stem_unit=1)
    assert text == (
        "Stem-and-leaf display of 6 values; leaf unit 0.1, stem unit 1, 1 line per stem\n"
        "key: 0 | 7 reads as 0.7\n"
        "count  stem | leaves\n"
        "    1     0 | 7\n"
        "    2     1 | 25\n"
        "    2     2 | 33\n"
        "    1     3 | 1"
    )


def test_negative_values_and_the_minus_zero_stem():
    # Hand-worked, leaf unit 1: -12 -> stem -1 leaf 2; -7, -3 -> stem -0 leaves 3, 7 (magnitude outward);
    # 0, 4 -> stem 0; 15 -> stem 1.
    display = stem_and_leaf_table([4, -7, 15, -3, 0, -12], stem_unit=10)
    assert _rows(display) == [
        ("-1", 0, 9, "2"),
        ("-0", 0, 9, "37"),
        ("0", 0, 9, "04"),
        ("1", 0, 9, "5"),
    ]
    assert display.reading(display.lines[1], 7) == -7.0


def test_decimal_rounding_half_away_from_zero():
    # Hand-worked, leaf unit 0.1: 0.15 -> 0.2, -0.25 -> -0.3, -0.04 -> 0.0 (shown on the 0 stem).
    display = stem_and_leaf_table([0.15, -0.25, -0.04], stem_unit=1)
    assert _rows(display) == [("-0", 0, 9, "3"), ("0", 0, 9, "02")]


def test_two_line_split_stems():
    # Hand-worked, leaf unit 1, leaves 0-4 and 5-9 on separate lines.
    display = stem_and_leaf_table([20, 21, 24, 25, 29, 33, 36], stem_unit=10, split=2)
    assert _rows(display) == [
        ("2", 0, 4, "014"),
        ("2", 5, 9, "59"),
        ("3", 0, 4, "3"),
        ("3", 5, 9, "6"),
    ]
    assert "2 [5-9] | 59" in str(display)


def test_five_line_split_stems():
    # Hand-worked: leaves 0-1, 2-3, 4-5, 6-7, 8-9 each on their own line.
    display = stem_and_leaf_table([10, 13, 14, 17, 18], stem_unit=10, split=5)
    assert [(r[1], r[3]) for r in _rows(display)] == [(0, "0"), (2, "3"), (4, "4"), (6, "7"), (8, "8")]


def test_negative_split_stems_run_from_most_negative():
    # Hand-worked: -16 on -1 [5-9], -12 on -1 [0-4], two empty -0 lines, 3 on 0 [0-4].
    display = stem_and_leaf_table([3, -12, -16], stem_unit=10, split=2)
    assert _rows(display) == [
        ("-1", 5, 9, "6"),
        ("-1", 0, 4, "2"),
        ("-0", 5, 9, ""),
        ("-0", 0, 4, ""),
        ("0", 0, 4, "3"),
    ]


def test_single_value():
    # Hand-worked: coarsest leaf unit writing 12.34 exactly is 0.01 -> 1234, stem 123 leaf 4.
    display = stem_and_leaf_table([12.34])
    assert _rows(display) == [("123", 0, 9, "4")]
    assert "reads as 12.34" in str(display)


def test_all_equal_values():
    # Hand-worked: 5 is exact at leaf unit 1 -> stem 0, four leaves 5.
    display = stem_and_leaf_table([5, 5, 5, 5])
    assert _rows(display) == [("0", 0, 9, "5555")]
    assert _rows(stem_and_leaf_table([0.0, 0.0])) == [("0", 0, 9, "00")]


def test_wide_range_chooses_stem_unit():
    # Hand-worked with the line ceiling max(6, floor(2 sqrt 4)) = 6: leaf unit 100 would need stems 0..6
    # (7 lines), so leaf unit 1000 split in 5 (4 lines) is the finest that fits; 500 -> 1 (half away).
    display = stem_and_leaf_table([3, 40, 500, 6000])
    assert (display.leaf_unit, display.split) == (1000.0, 5)
    assert _rows(display) == [("0", 0, 1, "001"), ("0", 2, 3, ""), ("0", 4, 5, ""), ("0", 6, 7, "6")]


def test_automatic_choice_respects_line_ceiling():
    x = np.random.default_rng(4).normal(50.0, 10.0, 400)
    display = stem_and_leaf_table(x)
    # Line ceiling floor(10 log10 n) for n >= 100 (Velleman and Hoaglin 1981, from memory).
    assert len(display.lines) <= math.floor(10 * math.log10(400))
    assert sum(ln.count for ln in display.lines) == 400
    finer = stem_and_leaf_table(x, stem_unit=display.stem_unit / 10)
    assert len(finer.lines) > math.floor(10 * math.log10(400))


def test_missing_values_are_counted_and_long_lines_shortened():
    display = stem_and_leaf_table([1.0] * 100 + [np.nan], stem_unit=10, max_leaves=10)
    assert (display.n, display.n_missing) == (100, 1)
    assert "1 missing left out" in str(display)
    assert "| 1111111111 (+90 more)" in str(display)


@pytest.mark.parametrize(
    "kwargs, error, message",
    [
        ({"stem_unit": 3}, ConfigError, "stem_unit must be a power of ten"),
        ({"split": 3}, ConfigError, "split must be one of 1, 2, 5"),
        ({"stem_unit": 1e-6}, InputError, "pass a larger stem_unit"),
    ],
)
def test_bad_options_name_the_value_and_the_fix(kwargs, error, message):
    with pytest.raises(error, match=message):
        stem_and_leaf([0.0, 1000.0], **kwargs)


def test_no_finite_value():
    with pytest.raises(InputError, match="No finite value to display"):
        stem_and_leaf([np.nan, np.inf])
