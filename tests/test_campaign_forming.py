"""Tests of campaign forming (pointsift.campaign_forming)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from pointsift.campaign_forming import assign_campaigns, choose_representatives, parse_campaign_window
from pointsift.errors import ConfigError


def test_window_rule_parsed_and_checked():
    assert parse_campaign_window("spring=1-6, fall=7-12").per_year == 2
    assert parse_campaign_window("year").per_year == 1
    with pytest.raises(ConfigError, match="both hold month 6"):
        parse_campaign_window("spring=1-6,fall=6-12")
    with pytest.raises(ConfigError, match="NAME=FIRST-LAST"):
        parse_campaign_window("spring")


def test_dates_to_seasons_in_time_order():
    frame = pd.DataFrame({"d": ["2018-10-03", "2018-03-15", "2019-04-01", "2019-01-20T00:00:00Z", "bad", None]})
    c = assign_campaigns(frame, date="d", campaign=None, window=parse_campaign_window("spring=1-6,fall=7-12"))
    assert c.labels == ("2018-spring", "2018-fall", "2019-spring")
    assert c.code.tolist() == [1, 0, 2, 2, -1, -1]
    assert c.reason[4] == "date 'bad' is not a date" and c.reason[5] == "no date"
    assert c.season == ("spring", "fall", "spring")


def test_window_wrapping_the_year_takes_the_first_year():
    frame = pd.DataFrame({"d": ["2018-12-10", "2019-01-05", "2019-06-01"]})
    c = assign_campaigns(frame, date="d", campaign=None, window=parse_campaign_window("winter=11-2"))
    assert c.labels == ("2018-winter",)
    assert c.code.tolist() == [0, 0, -1]
    assert "in no campaign window" in c.reason[2]


def test_label_column_ordered_by_median_date_and_representative_nearest_the_middle():
    frame = pd.DataFrame({
        "w": [0, 0, 0, 1, 1],
        "lab": ["B", "A", "A", "A", "B"],
        "d": ["2020-05-01", "2019-01-01", "2019-01-20", "2019-01-15", "2020-05-03"],
    })
    c = assign_campaigns(frame, date="d", campaign="lab", window=parse_campaign_window("year"))
    assert c.labels == ("A", "B")
    rep, by = choose_representatives(frame.w.to_numpy(), c, np.ones(5, dtype=bool))
    # campaign A's median date is 2019-01-15: of well 0's two readings, 2019-01-20 is nearer
    assert rep.tolist() == [True, False, True, True, True]
    assert by.tolist() == [-1, 2, -1, -1, -1]
