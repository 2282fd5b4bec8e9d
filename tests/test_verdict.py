"""Status, score and reasons from the evidence (issue 2, "Verdict").

The rules come from issue 2 and the module docstring of pointsift.verdict:
suspect at ``suspect_z`` unless the neighbours deviate alike (then review,
score halved), review at ``review_z``, unscreened with a reason when a point
cannot be judged; coincident records: contradicted -> suspect, undecided ->
review. Thresholds are passed explicitly so the tests follow the rules, not
the current defaults.
"""

import dataclasses

import numpy as np
import pandas as pd
import pytest

from pointsift.config import ScreenConfig
from pointsift.methods.autocorr import LocalAutocorrelation
from pointsift.methods.local import LocalResult
from pointsift.verdict import STATUSES, decide, format_length

CONFIG = ScreenConfig(value="v", suspect_z=5.0, review_z=3.5, fdr=0.05)


def make_local(z, expected=None, coherent=None, count=8, distance=400.0, **extra) -> LocalResult:
    """A LocalResult with the given residuals; fields not given are neutral."""
    z = np.asarray(z, dtype=float)
    n = z.size
    expected = np.full(n, 100.0) if expected is None else np.asarray(expected, float)
    given = {
        "expected": expected,
        "residual": z * 0.5,
        "scale": np.full(n, 0.5),
        "z": z,
        "neighbour_count": np.full(n, count),
        "neighbour_distance": np.full(n, distance),
        "echo": np.zeros(n),
        "curved_z": np.full(n, np.nan),
        "coherent": np.zeros(n, bool) if coherent is None else np.asarray(coherent, bool),
        "explained_by_curvature": np.zeros(n, bool),
        "excluded": np.zeros(n, bool),
        **extra,
    }
    values = {}
    for f in dataclasses.fields(LocalResult):
        if f.name in given:
            values[f.name] = given[f.name]
        elif f.name == "distance_model":
            values[f.name] = {}
        else:  # a field added later: neutral (no evidence)
            values[f.name] = np.zeros(n, bool)
    return LocalResult(**values)


def no_coincident(n):
    return pd.DataFrame({"role": np.full(n, "", dtype=object), "difference": np.full(n, np.nan), "partner": np.full(n, -1)})


def run(z, *, values=None, reasons=None, coincident=None, autocorr=None, config=CONFIG, slips=None, **local_kw):
    z = np.asarray(z, float)
    n = z.size
    local = make_local(z, **local_kw)
    values = local.expected + 0.5 * z if values is None else np.asarray(values, float)
    return decide(
        ids=np.array([f"W{i}" for i in range(n)], dtype=object),
        values=values,
        unscreened_reason=np.full(n, "", dtype=object) if reasons is None else np.asarray(reasons, dtype=object),
        local=local,
        max_neighbour_distance=np.full(n, 1234.0),
        autocorr=autocorr,
        coincident=no_coincident(n) if coincident is None else coincident,
        config=config,
        slips=slips,
    )


def test_status_words_are_the_four_of_the_issue():
    assert set(STATUSES) == {"suspect", "review", "ok", "unscreened"}


def test_thresholds_give_status_and_score():
    out = run([0.5, -3.7, 6.2, -5.0, 3.49])
    assert out["screen_status"].tolist() == ["ok", "review", "suspect", "suspect", "ok"]
    assert out["screen_score"].tolist() == [0.5, 3.7, 6.2, 5.0, 3.49]


def test_reason_states_value_size_side_expected_and_neighbours():
    out = run([-3.7, 0.5], values=[98.15, 100.25])
    # issue 2 example: "7.4 robust sd above the value expected from 8 neighbours within 1.2 km"
    assert out["screen_reasons"][0] == "value 98.15 is 3.7 robust sd below the 100 expected from 8 neighbours within 1.2 km"
    assert out["screen_reasons"][1].startswith("within 0.5 robust sd of the ")
    assert out["screen_reasons"][1].endswith(" expected from 8 neighbours within 1.2 km")


def test_coherent_deviation_is_review_with_half_score():
    # issue 2: a spatially coherent group is real signal and must not be called suspect
    out = run([7.0, 7.0], coherent=[True, False], echo=np.array([0.5, 0.0]))
    assert out["screen_status"].tolist() == ["review", "suspect"]
    assert out["screen_score"].tolist() == [3.5, 7.0]
    assert "50% of those neighbours deviate the same way: likely a real local feature" in out["screen_reasons"][0]


def test_unscreened_rows_keep_their_reason_and_have_no_score():
    reasons = ["", "no neighbour within 2.5 km", "value 'dry' is not a number", ""]
    out = run([1.0, np.nan, np.nan, np.nan], reasons=reasons)
    assert out["screen_status"].tolist() == ["ok", "unscreened", "unscreened", "unscreened"]
    assert out["screen_reasons"].tolist()[1:] == [
        "no neighbour within 2.5 km",
        "value 'dry' is not a number",
        "could not be predicted from the neighbours",
    ]
    assert np.isnan(out["screen_score"][1:]).all()


def test_thresholds_are_configurable():
    strict = CONFIG.replace(suspect_z=8.0, review_z=6.5)
    out = run([6.0, 7.0, 9.0], config=strict)
    assert out["screen_status"].tolist() == ["ok", "review", "suspect"]


def test_coincident_roles():
    coincident = pd.DataFrame(
        {
            "role": ["contradicted", "supported", "undecided", "undecided", "agrees", "agrees"],
            "difference": [3.0, 3.0, 1.25, 1.25, 0.01, 0.01],
            "partner": [1, 0, 3, 2, 5, 4],
        }
    )
    out = run([2.0, 0.1, 1.0, -1.0, 0.2, 0.3], coincident=coincident)
    assert out["screen_status"].tolist() == ["suspect", "ok", "review", "review", "ok", "ok"]
    assert out["screen_score"][0] >= CONFIG.suspect_z
    r = out["screen_reasons"]
    assert r[0].endswith("coincident record disagrees by 3: the neighbours side with W1")
    assert r[1].endswith("coincident record disagrees by 3: the neighbours side with this record, not W0")
    assert r[2].endswith("coincident record disagrees by 1.25 (W3); the neighbours cannot tell which is right")
    assert r[4].endswith("a coincident record (W5) agrees")


def test_significant_local_moran_is_named_in_plain_words():
    n = 4
    auto = LocalAutocorrelation(
        moran_i=np.array([-2.0, 1.5, 0.1, -1.0]),
        quadrant=np.array([4, 1, 3, 2]),
        gi_star_z=np.array([0.5, 3.1, -0.2, -1.0]),
        p_value=np.array([1e-5, 1e-5, 0.4, 0.2]),
        p_adjusted=np.array([4e-5, 4e-5, 0.4, 0.27]),
        permutations=np.full(n, 999),
        kernel="test",
    )
    out = run([6.0, 0.2, 3.7, 0.3], autocorr=auto)
    assert "local Moran's I: spatial outlier, high among low (p = 1e-05, adjusted 4e-05; Gi* z = 0.5)" in out["screen_reasons"][0]
    # supporting evidence is stated on flagged rows only: row 1 is significant
    # but ok (cluster membership alone is not an error), row 2 flagged but not significant
    assert out["screen_status"][1] == "ok" and "Moran" not in out["screen_reasons"][1]
    assert out["screen_status"][2] == "review"
    assert "Moran" not in out["screen_reasons"][2] + out["screen_reasons"][3]


def test_entry_mistake_that_fits_raises_review_to_suspect():
    slips = (np.array([True, True, False]), np.array(["decimal point one place off (maybe 10.1)", "x", ""], dtype=object))
    out = run([4.0, 4.0, 4.0], slips=slips, coherent=[False, True, False])
    assert out["screen_status"].tolist() == ["suspect", "review", "review"]
    assert out["screen_score"][0] >= CONFIG.suspect_z
    assert out["screen_reasons"][0].endswith("decimal point one place off (maybe 10.1)")


@pytest.mark.parametrize(
    "metres, text",
    [(850, "850 m"), (999.4, "999 m"), (1234, "1.2 km"), (19_940, "19.9 km"), (35_000, "35 km"), (np.nan, "an unknown distance")],
)
def test_format_length(metres, text):
    assert format_length(metres) == text


def test_quiet_sentences_equal_the_three_column_factorization():
    # the sentences of rows within the review threshold are built once per distinct
    # (z in tenths, neighbour count, distance); reference: pandas' factorization of
    # that three-column key, the earlier formulation, on varied rows
    rng = np.random.default_rng(8)
    n = 5000
    z = rng.normal(0, 1.2, n)
    z = np.where(np.abs(z) < 3.4, z, 0.1)
    counts = rng.integers(4, 65, n)
    local = make_local(z, neighbour_count=counts)
    distance = rng.choice([120.0, 480.0, 1234.0, 5100.0, 23000.0], n)
    out = decide(ids=np.array([f"W{i}" for i in range(n)], dtype=object), values=local.expected + 0.5 * z,
                 unscreened_reason=np.full(n, "", dtype=object), local=local, max_neighbour_distance=distance,
                 autocorr=None, coincident=no_coincident(n), config=CONFIG)
    key = pd.DataFrame({"z": np.round(np.abs(z), 1), "k": counts, "d": distance})
    codes, uniques = pd.MultiIndex.from_frame(key).factorize()
    expected = np.array([f"within {t:.1f} robust sd of the value expected from {k} neighbours within {format_length(d)}"
                         for t, k, d in uniques], dtype=object)[codes]
    assert (out["screen_reasons"].to_numpy() == expected).all()
