"""Points from tables (pointsift.tables): the comma rule and free column names.

Reading CSV files end to end is tested through :func:`pointsift.io.read_points`
in test_io.py.
"""

import pandas as pd
import pytest

from pointsift.tables import comma_convention, free_name, numbers_from_text


@pytest.mark.parametrize(
    "cells, thousands, expected",
    [
        (["1.5", "2"], None, "none"),
        (["319,910", "12,5", None, 3.0], None, "decimal"),  # one comma, no dot, in every comma cell
        (["319,910", "1,234,567"], None, "thousands"),  # two commas in one cell
        (["1,234.5", "12,5"], None, "thousands"),  # a dot beside a comma
        (["319,910"], ",", "thousands"),  # --thousands ,
    ],
)
def test_comma_convention_is_decided_from_all_cells(cells, thousands, expected):
    assert comma_convention(cells, thousands) == expected


def test_numbers_from_text_applies_one_convention():
    text = pd.Series(["319,910", " 12,5 ", None], dtype=object)
    assert numbers_from_text(text, "decimal").tolist()[:2] == ["319.910", "12.5"]
    assert numbers_from_text(pd.Series(["1,234.5", "12,5"], dtype=object), "thousands").tolist() == ["1234.5", "12,5"]


def test_free_name_is_case_insensitive():
    assert free_name("fid", ["FID", "fid_1"]) == "fid_2"
    assert free_name("geom", ["x"]) == "geom"
