"""Tests of the campaign report sections (pointsift.report.campaigns) on an invented programme."""

from __future__ import annotations

import base64
import importlib.util
import re
from html import escape
import sys
from pathlib import Path

import pytest

from pointsift.campaigns import CampaignConfig, screen_campaigns
from pointsift.config import ScreenConfig
from pointsift.errors import OutputError
from pointsift.report.campaigns import change_map_section, series_section, write_campaign_report

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def result():
    spec = importlib.util.spec_from_file_location("programme", ROOT / "benchmarks" / "programme.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules["programme"] = module
    spec.loader.exec_module(module)
    frame = module.make_programme(90, 8, seed=5, missing=0.0)
    frame.loc[400, "level_m"] += 9.0  # a slip: the series section draws at least one well
    return screen_campaigns(frame, CampaignConfig(screen=ScreenConfig(value="level_m", id="well_id", permutations=99), date="date"))


def test_sections_and_offline_page(result, tmp_path):
    html, figures = change_map_section(result)
    assert "Change between the last two campaigns" in html and set(figures) == {"change_map"}
    html, figures = series_section(result)
    assert "Flagged wells' series" in html and set(figures) == {"flagged_series"}
    path = write_campaign_report(result, tmp_path / "report.html")
    page = path.read_text(encoding="utf-8")
    assert escape(result.run_info["caution"]) in page
    assert not re.search(r"(src|href)=['\"]https?:", page)  # nothing fetched from a network
    images = re.findall(r"src='data:image/png;base64,([^']+)'", page)
    assert len(images) == 2
    # PNG signature (from the PNG specification, section 5.2)
    assert all(base64.b64decode(i)[:8] == b"\x89PNG\r\n\x1a\n" for i in images)
    with pytest.raises(OutputError, match="--overwrite"):
        write_campaign_report(result, path)


def test_the_report_is_the_screen_report_of_the_latest_campaign_with_the_campaign_sections(result):
    # issue 12: the report gains the change map and the flagged series; the rest is the screen report
    from pointsift.report.campaigns import campaign_report_html

    page = campaign_report_html(result)
    order = [page.index(f'id="{anchor}"') for anchor in ("caution", "readings")]
    order += [page.index(f"id='{anchor}'") for anchor in ("change-map", "series")]
    order += [page.index(f'id="{anchor}"') for anchor in ("latest", "counts", "flagged", "map", "run")]
    assert order == sorted(order)
    assert f"The latest campaign, {result.latest_campaign}, screened on its own" in page
    # the latest campaign's cards equal its campaign statuses in the readings layer (the same screen)
    readings = result.readings
    latest = readings[(readings.campaign_label == result.latest_campaign) & (readings.reading_role == "represents the well")]
    counts = latest["campaign_status"].value_counts()
    for word in ("suspect", "review", "ok"):
        assert f'data-status="{word}"><div class="count">' in page
        assert int(counts.get(word, 0)) == result.latest_screen.counts[word]
    # readings per status over all campaigns, as the readings layer counts them
    for word, n in result.counts.items():
        assert int((readings.reading_status == word).sum()) == n
        assert f'<th scope="row">{word}</th><td class="num">{n:,}</td>' in page
