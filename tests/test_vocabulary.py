"""Tests of pointsift.vocabulary: every written word comes from one place."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from pointsift import vocabulary as words

SRC = Path(__file__).resolve().parents[1] / "src" / "pointsift"


def test_statuses_in_order_of_seriousness():
    assert words.STATUSES == ("suspect", "review", "ok", "unscreened")
    assert words.FLAGGED == words.STATUSES[:2]


def test_quadrants_and_roles_are_distinct_words():
    assert sorted(words.QUADRANT_WORDS) == [1, 2, 3, 4]
    assert len(set(words.QUADRANT_WORDS.values())) == 4
    assert len(set(words.COINCIDENT_ROLES)) == len(words.COINCIDENT_ROLES)


@pytest.mark.parametrize(
    "direction, form, text",
    [
        (90, "short", "west-east"),
        (0, "strip", "south-north strip"),
        (90, "strips", "west-east strips, numbered south to north"),
        (22.5, "strip", "strip along 22.5\N{DEGREE SIGN}"),
        (135, "strips", "south-east to north-west strips, numbered south-west to north-east"),
        (30, "strips", "strips along azimuth 30\N{DEGREE SIGN}, numbered towards 120\N{DEGREE SIGN}"),
        (270, "short", "west-east"),  # axial: 270 is the same line as 90
        (45, "abbrev", "SW-NE"),
        (22.5, "label", "22.5"),
        (None, "label", "all"),
    ],
)
def test_direction_words(direction, form, text):
    assert words.direction_words(direction, form) == text


def test_unknown_direction_form_lists_the_forms():
    with pytest.raises(ValueError, match="short, abbrev, strip, strips, label"):
        words.direction_words(90, "long")


def test_status_tuple_is_spelled_only_in_the_vocabulary():
    # the four words written out together anywhere else would be a second spelling
    pattern = re.compile(r"""["']suspect["'],\s*["']review["'],\s*["']ok["']""")
    found = [p.relative_to(SRC).as_posix() for p in SRC.rglob("*.py") if pattern.search(p.read_text(encoding="utf-8"))]
    assert found == ["vocabulary.py"]
