"""ScreenConfig validation and length parsing."""

import dataclasses
import json

import pytest
from pyproj import get_units_map

from pointsift.config import DEFAULT_SENTINELS, ScreenConfig, parse_length
from pointsift.errors import ConfigError

# Reference: PROJ's unit table (pyproj.get_units_map, the EPSG unit definitions),
# looked up by PROJ short name (m, km, ft, mi), independent of pointsift.
UNITS = {unit.proj_short_name: unit for unit in get_units_map().values() if unit.category == "linear"}


@pytest.mark.parametrize(
    "text, unit, amount",
    [
        ("5km", "km", 5),
        ("750 m", "m", 750),
        ("250 ft", "ft", 250),  # international foot, 0.3048 m (PROJ units table)
        ("2mi", "mi", 2),  # statute mile, 1609.344 m (PROJ units table)
        (" 1.5 KM ", "km", 1.5),
        ("1e3m", "m", 1000),
    ],
)
def test_parse_length_matches_proj_unit_factors(text, unit, amount):
    # Reference: pyproj.get_units_map()[unit].conv_factor (metres per unit).
    assert parse_length(text) == pytest.approx(amount * float(UNITS[unit].conv_factor), rel=1e-12)


def test_parse_length_bare_number_is_metres():
    # Issue 2: a bare number is metres.
    assert parse_length(1200) == 1200.0
    assert parse_length("1200") == 1200.0


@pytest.mark.parametrize("text", ["5 parsecs", "km", "five km", "5,000m", ""])
def test_parse_length_rejects_text_and_names_the_value(text):
    # STYLE.md: the message names the offending value and the fix (an example length).
    with pytest.raises(ConfigError, match=r"--within .* is not a length\. .*for example '5km'"):
        parse_length(text, name="--within")


@pytest.mark.parametrize("text", [0, "0km", -3])
def test_parse_length_rejects_non_positive(text):
    with pytest.raises(ConfigError, match=r"must be a positive length, got"):
        parse_length(text)


def test_defaults_are_the_documented_ones():
    # Issue 2 / README option table: no-data -9999, -999, -99999; k 10; 999 permutations;
    # coincident tolerance 0.5 m; review 3, suspect 3.5; FDR 0.05.
    c = ScreenConfig(value="level_m")
    assert set(c.sentinels) == {-9999.0, -999.0, -99999.0} == set(DEFAULT_SENTINELS)
    assert (c.k, c.permutations, c.coincident_tolerance, c.review_z, c.suspect_z, c.fdr) == (10, 999, 0.5, 3.0, 3.5, 0.05)
    assert c.graph == "knn" and c.min_neighbours == 4


@pytest.mark.parametrize(
    "changes, message",
    [
        ({"value": ""}, r"value= must name the column"),
        ({"graph": "delaunay"}, r"graph='delaunay' is not known; choose one of knn, band"),
        ({"graph": "band"}, r"graph='band' needs a band distance: pass within='5km'"),
        ({"detrend": "cubic"}, r"detrend='cubic' is not known; choose one of none, auto, surface1, surface2, polish"),
        ({"k": 2}, r"k=2 is outside the range: it must be a whole number from 3 to 100"),
        ({"k": 8.5}, r"k=8\.5 is not a whole number"),
        ({"min_neighbours": 1}, r"min_neighbours=1 is outside the range: it must be a whole number from 2 to 50"),
        ({"k": 5, "min_neighbours": 6}, r"min_neighbours= \(6\) cannot exceed k= \(5\)"),
        ({"permutations": 10}, r"permutations=10 is outside the range: it must be a whole number from 99 to 100000"),
        ({"fdr": 1.0}, r"fdr=1\.0 is outside the range: it must be between 0 and 1"),
        ({"review_z": 6.0}, r"review_z= \(6\.0\) must be positive and below suspect_z= \(3\.5\)"),
        ({"coincident_tolerance": -1.0}, r"coincident_tolerance=-1\.0 is outside the range: it must be zero or positive"),
        ({"lag_count": 0}, r"lag_count=0 is outside the range: it must be a whole number from 1 to 1000"),
        ({"lag_width": -5.0}, r"lag_width=-5\.0 is outside the range: it must be positive"),
        ({"lag_width": "500 leagues"}, r"lag_width='500 leagues' is not a length"),
        ({"max_distance": 0.0}, r"max_distance=0\.0 is outside the range: it must be positive"),
        ({"coincident_value_tolerance": -2.0}, r"coincident_value_tolerance=-2\.0 is outside the range: it must be positive"),
        ({"thousands": "."}, r"thousands='\.' is not known; choose one of ,"),
    ],
)
def test_invalid_options_raise_config_error_naming_the_value(changes, message):
    with pytest.raises(ConfigError, match=message):
        ScreenConfig(**{"value": "level_m", **changes})


def test_band_with_within_is_valid_and_min_neighbours_may_exceed_k_there():
    c = ScreenConfig(value="level_m", graph="band", within=2000.0, min_neighbours=12)
    assert c.within == 2000.0 and c.min_neighbours == 12


def test_frozen_and_replace_validates_again():
    c = ScreenConfig(value="level_m")
    with pytest.raises(dataclasses.FrozenInstanceError):
        c.k = 5  # type: ignore[misc]
    assert c.replace(k=12).k == 12
    with pytest.raises(ConfigError, match="k=500 is outside the range"):
        c.replace(k=500)


def test_sentinels_become_floats_and_record_is_plain_json():
    c = ScreenConfig(value="level_m", sentinels=(-1, "-8888"))
    assert c.sentinels == (-1.0, -8888.0)
    record = c.as_record()
    # Reference: the json module must round-trip the record (it goes into run_info).
    assert json.loads(json.dumps(record)) == record
    assert "extra" not in record and record["sentinels"] == [-1.0, -8888.0]
    assert set(ScreenConfig.option_names()) == set(record)


def test_lengths_with_units_are_accepted_everywhere_a_length_is():
    # a plan's lag_width = "500m" and Python's lag_width="500m" go through one check (issue 9)
    c = ScreenConfig(value="level_m", lag_width="500m", within="2km", max_distance="1.5 mi", coincident_tolerance="1ft")
    assert (c.lag_width, c.within, c.coincident_tolerance) == (500.0, 2000.0, 0.3048)  # PROJ unit table factors
    assert c.max_distance == pytest.approx(1.5 * float(UNITS["mi"].conv_factor), rel=1e-12)
    assert c.graph == "band"  # a band distance means a distance band, for every caller


def test_k_below_4_lowers_min_neighbours_for_every_caller():
    assert ScreenConfig(value="level_m", k=3).min_neighbours == 3
    assert ScreenConfig(value="level_m", k=6).min_neighbours == 4
    assert ScreenConfig(value="level_m", k=3, min_neighbours=2).min_neighbours == 2
    assert ScreenConfig(value="level_m", within=500.0).min_neighbours == 4


@pytest.mark.parametrize(
    "words, text",
    [("python", "crs='EPSG:4326'"), ("cli", "--crs EPSG:4326"), ("plan", 'crs = "EPSG:4326"')],
)
def test_one_message_names_the_option_in_the_callers_words(words, text):
    from pointsift.config import caller, spell

    with caller(words):
        assert spell("crs", "EPSG:4326") == text
        with pytest.raises(ConfigError) as caught:
            ScreenConfig(value="level_m", k=2)
    flag = {"python": "k=2", "cli": "--neighbours 2", "plan": "k = 2"}[words]
    assert str(caught.value).startswith(f"{flag} is outside the range")
