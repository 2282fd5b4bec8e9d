"""Records at one spot that disagree (issue 2, "Coincident points").

Rule under test (issue 2; common practice in well-database cleaning): two
records at one spot whose values disagree are each judged against the other
neighbours; the one the neighbours contradict is suspect, and where the
neighbours cannot tell, both need review.
"""

import numpy as np
import pandas as pd
import pytest
import shapely
from conftest import build_wells

from pointsift.config import ScreenConfig
from pointsift.methods.coincident import coincident_conflicts
from pointsift.pipeline import screen_frame


def _judge(values, groups, z, scale=None, **kw):
    values = np.asarray(values, float)
    scale = np.ones(values.size) if scale is None else np.asarray(scale, float)
    return coincident_conflicts(values, np.asarray(groups), np.asarray(z, float), scale, **kw)


def test_contradicted_and_supported_records():
    out = _judge([10.0, 14.0, 11.0], [0, 0, -1], [0.2, 6.0, 0.1], value_tolerance=1.0, decisive_z=3.5, margin=2.0)
    assert out["role"].tolist() == ["supported", "contradicted", ""]
    assert out["difference"].tolist()[:2] == [4.0, 4.0] and np.isnan(out["difference"][2])
    assert out["partner"].tolist() == [1, 0, -1]


def test_neighbours_cannot_tell_gives_both_undecided():
    # both records equally far from what the neighbours expect, on either side
    out = _judge([9.0, 11.0], [0, 0], [-2.5, 2.5], value_tolerance=1.0, decisive_z=3.5, margin=2.0)
    assert out["role"].tolist() == ["undecided", "undecided"]
    # both contradicted equally (|z| 5 and 5.5, within the margin): still undecided
    out = _judge([0.0, 20.0], [0, 0], [5.0, 5.5], value_tolerance=1.0, decisive_z=3.5, margin=2.0)
    assert out["role"].tolist() == ["undecided", "undecided"]


def test_agreeing_records_and_default_tolerance_from_the_scale():
    assert _judge([10.0, 10.4], [0, 0], [0.1, 0.5], value_tolerance=1.0)["role"].tolist() == ["agrees", "agrees"]
    # without a tolerance the records' own residual scale decides
    narrow = _judge([10.0, 10.4], [0, 0], [0.1, 0.5], scale=[0.01, 0.01])
    wide = _judge([10.0, 10.4], [0, 0], [0.1, 0.5], scale=[5.0, 5.0])
    assert narrow["role"].tolist() != ["agrees", "agrees"] and wide["role"].tolist() == ["agrees", "agrees"]


def test_groups_of_three_and_unusable_members():
    out = _judge([10.0, 10.1, 30.0, np.nan], [2, 2, 2, 2], [0.1, 0.2, 9.0, np.nan], value_tolerance=1.0, decisive_z=3.5)
    assert out["role"].tolist() == ["supported", "supported", "contradicted", ""]
    assert out["partner"][2] in (0, 1) and out["difference"][2] == pytest.approx(20.0)
    assert out["partner"][3] == -1


# --- end to end --------------------------------------------------------------------------


def _with_twin(seed, offset, twin_of=20, shift=(0.2, 0.1)):
    """Wells with an added record 0.22 m from well ``twin_of``, its value moved by ``offset``."""
    wells = build_wells(250, seed=seed, noise=0.05)
    twin = wells.iloc[[twin_of]].copy()
    twin["well_id"] = "TWIN"
    twin["level_m"] = twin["level_m"] + offset
    point = wells.geometry.iloc[twin_of]
    twin = twin.set_geometry([shapely.Point(point.x + shift[0], point.y + shift[1])], crs=wells.crs)
    return pd.concat([wells, twin], ignore_index=True)


@pytest.mark.parametrize("seed", [0, 1])
def test_twin_the_neighbours_contradict_is_suspect(seed):
    wells = _with_twin(seed, offset=3.0)
    n = len(wells)
    result = screen_frame(wells, ScreenConfig(value="level_m", id="well_id", permutations=99))
    out = result.frame
    assert len(out) == n  # no row lost
    # the graph is not broken: both records keep a full set of other neighbours
    assert result.graph.counts[20] == result.graph.counts[n - 1] == 10
    assert not np.isin(result.graph.indices[[20, n - 1]], [20, n - 1]).any()
    assert out.loc[n - 1, "screen_status"] == "suspect"
    assert "coincident record disagrees by 3: the neighbours side with W0020" in out.loc[n - 1, "screen_reasons"]
    assert out.loc[20, "screen_status"] == "ok"
    assert out.loc[n - 1, "coincident_role"] == "contradicted" and out.loc[20, "coincident_role"] == "supported"


def test_twins_the_neighbours_cannot_tell_apart_both_review():
    wells = build_wells(250, seed=2, noise=0.05)
    # replace well 30 by two records on either side of what its neighbours expect
    base = screen_frame(wells, ScreenConfig(value="level_m", permutations=99))
    expected = base.frame.loc[30, "expected_value"]
    spread = base.frame.loc[30, "residual_scale"]
    twin = wells.iloc[[30]].copy()
    wells.loc[30, "level_m"] = expected + 2.2 * spread
    twin["level_m"] = expected - 2.2 * spread
    twin["well_id"] = "TWIN"
    wells = pd.concat([wells, twin], ignore_index=True)
    out = screen_frame(wells, ScreenConfig(value="level_m", id="well_id", permutations=99)).frame
    assert len(out) == 251
    for row in (30, 250):
        assert out.loc[row, "screen_status"] == "review"
        assert "coincident record disagrees by" in out.loc[row, "screen_reasons"]
        assert "the neighbours cannot tell which is right" in out.loc[row, "screen_reasons"]


def test_agreeing_twins_are_ok_and_say_so():
    wells = _with_twin(3, offset=0.0)
    out = screen_frame(wells, ScreenConfig(value="level_m", id="well_id", permutations=99)).frame
    assert out.loc[250, "screen_status"] == "ok" and out.loc[20, "screen_status"] == "ok"
    assert "a coincident record (W0020) agrees" in out.loc[250, "screen_reasons"]


def test_agreeing_records_name_each_other_not_themselves():
    # Issue 10, item 18: "a coincident record (W7) agrees" was the reason of W7 itself.
    out = _judge([5.0, 5.0, 5.0, 8.0], [0, 0, 0, -1], [0.1, 0.2, 0.3, 0.0], value_tolerance=1.0)
    assert out["role"].tolist()[:3] == ["agrees"] * 3
    partners = out["partner"].tolist()[:3]
    assert all(p != row and p in (0, 1, 2) for row, p in enumerate(partners)), partners
