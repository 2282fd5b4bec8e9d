"""The screening report (no browser): self-contained HTML, inline images, table vs GeoPackage, JSON vs schema.

The GeoPackage is read back with pyogrio (an independent reader), the page
with the standard library's HTML parser, the PNGs with Pillow, the JSON
against the schema file in the repository with jsonschema.
"""

from __future__ import annotations

import base64
import io
import json
import math
import re
import xml.etree.ElementTree as ET
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pandas as pd
import pyogrio
import pytest
from click.testing import CliRunner

from pointsift.cli import main
from pointsift.config import ReportConfig, ScreenConfig
from pointsift.errors import OutputError
from pointsift.report import build_report, flagged_rows
from pointsift.findings import MapData
from pointsift.report.figures import grid_north_offset, nice_length, plot_status_map
from pointsift.report.numbers import format_length, format_number
from pointsift.run import screen_file

from conftest import build_wells, write_points

SCHEMA_PATH = Path(__file__).resolve().parents[1] / "src" / "pointsift" / "report" / "summary.schema.json"


def _planted_layer(n: int = 320, seed: int = 11):
    """Invented wells with a decimal slip, a sign error, a spike and a blank value."""
    wells = build_wells(n, seed=seed)
    wells.loc[7, "level_m"] = wells.loc[7, "level_m"] * 10.0
    wells.loc[40, "level_m"] = -wells.loc[40, "level_m"]
    wells.loc[90, "level_m"] = wells.loc[90, "level_m"] + 6.0
    wells.loc[150, "level_m"] = np.nan
    return wells


@pytest.fixture(scope="module")
def screened(tmp_path_factory):
    folder = tmp_path_factory.mktemp("report")
    source = write_points(_planted_layer(), folder / "wells.gpkg")
    out, html_path, json_path = folder / "screened.gpkg", folder / "report.html", folder / "summary.json"
    run = screen_file(source, out, ScreenConfig(value="level_m", id="well_id"), report_path=html_path,
                      summary_json_path=json_path)
    return {
        "run": run,
        "gpkg": out,
        "html": html_path.read_text(encoding="utf-8"),
        "summary": json.loads(json_path.read_text(encoding="utf-8")),
        "layer": pyogrio.read_dataframe(out, layer="screened"),
    }


class _Page(HTMLParser):
    """Collects every attribute that can fetch something, the images, the SVGs and the flagged table."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.fetching: list[tuple[str, str, str]] = []
        self.images: list[str] = []
        self.svgs: list[str] = []
        self._svg_depth = 0
        self._svg_parts: list[str] = []
        self.table_rows: list[dict] = []
        self._in_flagged = False
        self._row: dict | None = None
        self._cell: dict | None = None
        self.cards: dict[str, int] = {}
        self._card: str | None = None

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        for name in ("src", "href", "srcset", "action", "poster", "data", "formaction", "background", "xlink:href"):
            if name in a and a[name] is not None:
                self.fetching.append((tag, name, a[name]))
        if tag == "img":
            self.images.append(a.get("src", ""))
        if tag == "svg" or self._svg_depth:
            self._svg_depth += tag == "svg"
            inner = " ".join(f'{k}="{v}"' for k, v in attrs)
            self._svg_parts.append(f"<{tag} {inner}>")
        if tag == "table" and a.get("id") == "flagged-table":
            self._in_flagged = True
        if self._in_flagged and tag == "tr" and "data-row" in a:
            self._row = {"row": int(a["data-row"]), "status": a["data-status"], "cells": []}
        if self._row is not None and tag == "td":
            self._cell = {"sort": a.get("data-sort"), "text": ""}
        if tag == "div" and "card" in (a.get("class") or "") and "data-status" in a:
            self._card = a["data-status"]
        if tag == "span" and self._card and "data-count" in a:
            self.cards[self._card] = int(a["data-count"])
            self._card = None

    def handle_endtag(self, tag):
        if self._svg_depth:
            self._svg_parts.append(f"</{tag}>")
            if tag == "svg":
                self._svg_depth -= 1
                if not self._svg_depth:
                    self.svgs.append("".join(self._svg_parts))
                    self._svg_parts = []
        if tag == "td" and self._cell is not None and self._row is not None:
            self._row["cells"].append(self._cell)
            self._cell = None
        if tag == "tr" and self._row is not None:
            self.table_rows.append(self._row)
            self._row = None
        if tag == "table":
            self._in_flagged = False

    def handle_data(self, data):
        if self._cell is not None:
            self._cell["text"] += data


def _parse(html: str) -> _Page:
    page = _Page()
    page.feed(html)
    return page


# --------------------------------------------------------------------------- self-contained page

def test_page_fetches_nothing_from_a_network(screened):
    html = screened["html"]
    page = _parse(html)
    assert page.images, "the report should carry figures"
    for tag, name, value in page.fetching:
        # only inline data and links inside the page itself
        assert value.startswith("data:") or value.startswith("#"), (tag, name, value[:80])
    assert not re.search(r"https?://", html), "no http(s) address anywhere in the page"
    assert not re.search(r"<script[^>]*\bsrc\s*=", html, re.I)
    assert not re.search(r"<link[^>]*rel=\"?stylesheet", html, re.I)
    assert not re.search(r"@import|url\(", html, re.I)
    # the page also tells the browser to fetch nothing (Content-Security-Policy)
    assert "default-src 'none'" in html and "img-src data:" in html


def test_every_image_is_a_sharp_png_and_every_svg_parses(screened):
    page = _parse(screened["html"])
    from PIL import Image

    for uri in page.images:
        head, _, payload = uri.partition(",")
        assert head == "data:image/png;base64"
        raw = base64.b64decode(payload, validate=True)
        assert raw[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG spec, ISO/IEC 15948, section 5.2)
        image = Image.open(io.BytesIO(raw))
        image.load()
        assert image.width >= 600 and image.height >= 300
        assert min(image.info["dpi"]) >= 149.9  # pHYs chunk written by matplotlib: 150 dpi
        pixels = np.asarray(image.convert("L"), dtype=float)
        assert pixels.std() > 5, "a figure is blank"
    assert page.svgs
    for svg in page.svgs:
        root = ET.fromstring(svg)
        assert root.tag == "svg" and len(list(root)) >= 1


def test_figures_named_in_summary_are_all_on_the_page(screened):
    summary, page = screened["summary"], _parse(screened["html"])
    expected = {"status_map", "histogram", "strips", "residual_map", "neighbour_scatter", "variogram"}
    expected |= {f["figure"] for f in summary["lag_pairs"]["figures"]}
    assert set(summary["figures"]) == expected
    assert len(page.images) == len(expected)
    assert len(summary["lag_pairs"]["figures"]) == 4  # one per default direction: W-E, SW-NE, S-N, SE-NW


def test_caution_is_carried(screened):
    html, summary = screened["html"], screened["summary"]
    for words in ("not determinations", "field records", "licensed professional practice"):
        assert words in summary["caution"]
        assert words in html
    assert html.count(summary["caution"].split(".")[0]) >= 2  # at the top and in the footer


# --------------------------------------------------------------------------- numbers equal the GeoPackage

def test_flagged_table_rows_equal_geopackage_suspect_and_review_rows(screened):
    layer, page = screened["layer"], _parse(screened["html"])
    flagged = layer[layer["screen_status"].isin(["suspect", "review"])]
    assert len(flagged) >= 3  # the planted slip, sign error and spike
    rows = page.table_rows
    assert sorted(r["row"] for r in rows) == sorted(flagged.index.tolist())
    # strongest first: suspect before review, then by score, largest first (ties by row), sorted here by pandas
    expect = (flagged.assign(rank=flagged["screen_status"].map({"suspect": 0, "review": 1}), row=flagged.index)
              .sort_values(["rank", "screen_score", "row"], ascending=[True, False, True]))
    assert [r["row"] for r in rows] == expect.index.tolist()
    for r in rows:
        g = layer.loc[r["row"]]
        rank, ident, status, value, exp, score, reasons = r["cells"]
        assert ident["text"] == g["well_id"]
        assert r["status"] == g["screen_status"]
        assert float(value["sort"]) == g["level_m"]
        assert float(exp["sort"]) == g["expected_value"]
        assert float(score["sort"]) == g["screen_score"]
        assert reasons["text"] == g["screen_reasons"]


def test_summary_json_validates_and_its_numbers_equal_the_geopackage(screened):
    import jsonschema

    summary, layer = screened["summary"], screened["layer"]
    schema = json.loads(SCHEMA_PATH.read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator.check_schema(schema)
    jsonschema.validate(summary, schema, cls=jsonschema.Draft202012Validator)
    counts = layer["screen_status"].value_counts()
    assert summary["counts"] == {s: int(counts.get(s, 0)) for s in ("suspect", "review", "ok", "unscreened")}
    assert sum(summary["counts"].values()) == len(layer) == summary["input"]["rows"]
    assert _parse(screened["html"]).cards == summary["counts"]
    rows = summary["flagged"]["rows"]
    assert summary["flagged"]["count"] == len(rows) == counts.get("suspect", 0) + counts.get("review", 0)
    for item in rows:
        g = layer.loc[item["row"]]
        assert (item["id"], item["status"], item["reasons"]) == (g["well_id"], g["screen_status"], g["screen_reasons"])
        assert (item["value"], item["expected_value"], item["score"]) == (g["level_m"], g["expected_value"], g["screen_score"])
    # the run record in the GeoPackage names the same CRS and counts
    info = pyogrio.read_dataframe(screened["gpkg"], layer="run_info", read_geometry=False).set_index("key")["value"]
    assert json.loads(info["counts"]) == summary["counts"]
    assert info["work_crs"] == summary["crs"]["work"]


def test_schema_rejects_a_broken_summary(screened):
    import jsonschema

    schema = json.loads(SCHEMA_PATH.read_text(encoding="utf-8"))
    broken = json.loads(json.dumps(screened["summary"]))
    broken["counts"]["suspect"] = -1
    with pytest.raises(jsonschema.ValidationError, match="minimum"):
        jsonschema.validate(broken, schema, cls=jsonschema.Draft202012Validator)
    broken = json.loads(json.dumps(screened["summary"]))
    broken["flagged"]["rows"][0]["status"] = "ok"
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(broken, schema, cls=jsonschema.Draft202012Validator)


def test_quadrant_and_strip_numbers_equal_the_geopackage(screened):
    summary, layer = screened["summary"], screened["layer"]
    words = layer["local_moran_quadrant"]
    counts = words[words != ""].value_counts()
    assert summary["local_evidence"]["neighbour_scatter"]["quadrant_counts"] == {
        w: int(counts.get(w, 0)) for w in ("high among high", "low among high", "low among low", "high among low")}
    tables = set(pyogrio.list_layers(screened["gpkg"])[:, 0])
    # the screen writes these three; the report must show exactly what they hold
    assert {"strips", "variogram", "lag_pairs"} <= tables
    strips = pyogrio.read_dataframe(screened["gpkg"], layer="strips")
    assert len(strips) == len(summary["strips"]["rows"]) > 0
    for got, row in zip(summary["strips"]["rows"], strips.itertuples()):
        assert (got["n"], got["flagged"]) == (row.n, bool(row.flagged))
        assert got["u"] == (None if math.isnan(row.u) else row.u)
    table = pyogrio.read_dataframe(screened["gpkg"], layer="variogram", read_geometry=False)
    assert summary["variogram"]["available"] and len(table) == len(summary["variogram"]["table"]) > 0
    np.testing.assert_array_equal(table["pairs"].to_numpy(), [r["pairs"] for r in summary["variogram"]["table"]])
    got = np.array([np.nan if r["gamma"] is None else r["gamma"] for r in summary["variogram"]["table"]])
    np.testing.assert_array_equal(table["gamma"].to_numpy(dtype=float), got)
    pairs = pyogrio.read_dataframe(screened["gpkg"], layer="lag_pairs")
    lp = summary["lag_pairs"]
    # the layer holds the flagged pairs that carry evidence about an error (issue 11): the report lists those
    assert lp["available"] and lp["pairs_flagged"] >= len(pairs) == lp["pairs_written"] > 0
    # the JSON lists the farthest-out pairs (at most 100), each one a row of the GeoPackage's layer, in its order
    listed = lp["flagged_pairs"]
    assert len(listed) == lp["flagged_pairs_listed"] == min(100, len(pairs)) > 0
    stored = list(zip(pairs["tail_id"], pairs["head_id"], pairs["pair_z"]))
    positions = [stored.index((p["tail_id"], p["head_id"], p["pair_z"])) for p in listed]
    assert positions == sorted(positions)
    cut = sorted(np.abs(pairs["pair_z"].to_numpy()), reverse=True)[len(listed) - 1]
    assert all(abs(p["pair_z"]) >= cut for p in listed)


def _page_text(html: str, element_id: str) -> str:
    start = html.index(f'id="{element_id}"')
    return re.sub(r"<[^>]+>", " ", html[start:html.index("</table>", start)])


def test_page_json_and_geopackage_agree_on_model_counts_thresholds_and_flagged_rows(screened):
    summary, html = screened["summary"], screened["html"]
    info = pyogrio.read_dataframe(screened["gpkg"], layer="run_info", read_geometry=False).set_index("key")["value"]
    # variogram model: the GeoPackage's run record, the JSON and the page
    stored = json.loads(info["variogram"])["model"]
    shown = summary["variogram"]["model"]
    for key in ("model", "nugget", "partial_sill", "sill", "practical_range", "trustworthy"):
        assert shown[key] == stored[key], key
    model_text = _page_text(html, "variogram-model")
    assert format_number(stored["nugget"]) in model_text and format_number(stored["sill"]) in model_text
    assert format_length(stored["practical_range"]) in model_text
    # thresholds: the screen's parameters, the JSON and the page's own statement
    parameters = json.loads(info["parameters"])
    assert summary["thresholds"]["suspect_z"] == parameters["suspect_z"] == 3.5  # ScreenConfig default
    assert summary["thresholds"]["review_z"] == parameters["review_z"]
    assert summary["thresholds"]["fdr"] == parameters["fdr"]
    assert f"|z| &ge; {format_number(parameters['suspect_z'])}" in html
    # counts and every flagged row, neighbourhood included, against the layer and its distances
    assert json.loads(info["counts"]) == summary["counts"] == _parse(html).cards
    layer = screened["layer"]
    rows = summary["flagged"]["rows"]
    assert rows and summary["flagged"]["neighbourhoods"]
    xy = np.column_stack([layer.geometry.x, layer.geometry.y])  # the test layer is projected in metres
    ids = layer["well_id"].tolist()
    for item in rows:
        g = layer.loc[item["row"]]
        assert item["residual_scale"] == g["residual_scale"] and item["local_residual_z"] == g["local_residual_z"]
        assert len(item["neighbours"]) == g["neighbour_count"]
        for nb in item["neighbours"]:
            assert ids[nb["row"]] == nb["id"] and nb["value"] == layer.loc[nb["row"], "level_m"]
            assert math.isclose(nb["distance_m"], float(np.hypot(*(xy[nb["row"]] - xy[item["row"]]))), rel_tol=1e-9)
        assert f'data-row="{item["row"]}"' in html


def test_histogram_and_stem_leaf_set_far_values_apart(screened):
    summary, layer = screened["summary"], screened["layer"]
    values = layer["level_m"].to_numpy(dtype=float)
    values = values[np.isfinite(values)]
    d = summary["distribution"]
    q1, q3 = np.percentile(values, [25, 75])  # reference: numpy percentiles, Tukey's far fences at 3 IQR
    low, high = q1 - 3 * (q3 - q1), q3 + 3 * (q3 - q1)
    assert math.isclose(d["far_fences"]["low"], low) and math.isclose(d["far_fences"]["high"], high)
    inner = values[(values >= low) & (values <= high)]
    hist = d["histogram"]
    assert hist["counts"] == np.histogram(inner, bins=np.asarray(hist["edges"]))[0].tolist()  # numpy.histogram
    assert sum(hist["counts"]) + hist["low"]["n"] + hist["high"]["n"] == values.size == d["all"]["n"]
    assert hist["high"]["values"] == sorted(values[values > high].tolist())
    assert hist["low"]["values"] == sorted(values[values < low].tolist())
    assert layer.loc[7, "level_m"] in hist["high"]["values"]  # the planted decimal slip (x 10)
    stem = d["stem_leaf"]
    assert sum(line["count"] for line in stem["lines"]) == inner.size
    text = stem["text"].splitlines()
    assert text[-1].startswith("HI: ")
    listed = [float(v) for v in text[-1][4:].split(" (+")[0].split(", ")]
    np.testing.assert_allclose(listed, hist["high"]["values"], rtol=1e-6)  # listed as recorded, not at the leaf unit
    assert stem["high"] == hist["high"] and stem["low"] == hist["low"]
    assert ("LO: " in stem["text"]) == bool(hist["low"]["n"])
    # the summary without suspects leaves out exactly the suspect rows
    assert d["without_suspects"]["n"] == values.size - summary["counts"]["suspect"]
    assert math.isclose(d["all"]["mean"], float(np.mean(values)), rel_tol=1e-12)


# --------------------------------------------------------------------------- pieces checked against outside references

def test_neighbour_scatter_equals_esda_local_moran_quadrants():
    import esda
    import libpysal

    from pointsift.graph import build_graph
    from pointsift.methods.autocorr import local_autocorrelation

    rng = np.random.default_rng(5)
    n, k = 60, 6
    xy = rng.uniform(0, 1000, (n, 2))
    values = xy[:, 0] * 0.01 + rng.normal(0, 1, n)
    graph = build_graph(xy, kind="knn", k=k)
    auto = local_autocorrelation(values, graph, permutations=9, seed=1)
    z, lag = auto.standardized, auto.neighbour_mean
    w = libpysal.weights.W({i: graph.indices[i][graph.indices[i] >= 0].tolist() for i in range(n)})
    w.transform = "r"
    reference = esda.Moran_Local(values, w, permutations=0)  # esda: standardized z and its quadrant q
    np.testing.assert_allclose(z, reference.z, rtol=1e-12)
    np.testing.assert_allclose(lag, libpysal.weights.lag_spatial(w, reference.z), rtol=1e-12)
    np.testing.assert_array_equal(auto.quadrant, reference.q)
    # the slope of the neighbour mean on the value is global Moran's I for row-standardized weights
    moran = esda.Moran(values, w, permutations=0)
    assert math.isclose(float((z * lag).sum() / (z * z).sum()), moran.I, rel_tol=1e-10)


def test_neighbour_scatter_leaves_out_unjudged_rows_and_neighbours():
    from pointsift.graph import NeighbourGraph
    from pointsift.methods.autocorr import local_autocorrelation

    values = np.array([1.0, 2.0, 3.0, 4.0, np.nan])
    indices = np.array([[1, 2], [0, 4], [1, 3], [2, -1], [0, 1]])
    graph = NeighbourGraph(indices, np.where(indices >= 0, 1.0, np.inf), "knn", np.inf)
    auto = local_autocorrelation(values, graph, permutations=9, seed=0)
    y = values[:4]
    zz = (y - y.mean()) / y.std()  # numpy std, n denominator, as esda uses
    assert np.isnan(auto.standardized[4]) and np.isnan(auto.neighbour_mean[4])
    np.testing.assert_allclose(auto.neighbour_mean[:4], [(zz[1] + zz[2]) / 2, zz[0], (zz[1] + zz[3]) / 2, zz[2]])


def test_meridian_convergence_of_utm_matches_the_textbook_formula():
    # Snyder (1987), Map Projections - A Working Manual, USGS PP 1395: on a transverse Mercator the grid
    # convergence is close to atan(tan(lon - lon0) sin(lat)) (from memory; exact to about 1e-3 degree near the
    # central meridian). UTM zone 33N has lon0 = 15 degrees.
    from pyproj import Transformer

    x, y = Transformer.from_crs("EPSG:4326", "EPSG:32633", always_xy=True).transform(17.0, 47.0)
    expected = math.degrees(math.atan(math.tan(math.radians(2.0)) * math.sin(math.radians(47.0))))
    got = grid_north_offset("EPSG:32633", x, y)
    assert abs(abs(got) - expected) < 0.01


@pytest.mark.parametrize(("span", "expected"), [(7300.0, 1000.0), (1.0, 0.2), (26_000.0, 5000.0), (480.0, 50.0)])
def test_scale_bar_lengths_are_round(span, expected):
    # 1-2-5 series of round lengths (common practice for map scale bars)
    assert nice_length(span) == expected


def test_large_layers_are_shaded_not_dropped(screened):
    result = screened["run"].result
    report = build_report(result, config=ReportConfig(report_points=100))
    summary = report.summary
    counts = summary["counts"]
    assert summary["map"]["shaded"] == {"ok": counts["ok"]}
    assert summary["map"]["drawn"]["suspect"] == counts["suspect"]
    assert summary["flagged"]["count"] == counts["suspect"] + counts["review"]
    rm = summary["local_evidence"]["residual_map"]
    assert rm["sample_seed"] == 0 and rm["drawn"] == 100 and rm["points"] > 100
    assert "shown as density" in report.html and "seeded sample" in report.html


def test_status_map_labels_the_strongest_suspects_without_overlap():
    xy = np.array([[0.0, 0.0], [1000.0, 0.0], [0.0, 1000.0], [1000.0, 1000.0], [500.0, 500.0], [520.0, 510.0]])
    status = np.array(["suspect", "suspect", "review", "ok", "suspect", "suspect"], dtype=object)
    ids = np.array(["A", "B", "C", "D", "E", "F"], dtype=object)
    score = np.array([5.0, 9.0, 3.5, 0.2, 7.0, 6.0])
    data = MapData(xy=xy, values=np.array([1.0, 2.0, 3.0, 4.0, 5.0, 6.0]), ids=ids, status=status, score=score)
    fig, record = plot_status_map(data, crs_label="EPSG:32633", max_labels=3)
    texts = [t for t in fig.axes[0].texts if t.get_text() in set(ids)]
    assert [t.get_text() for t in texts] == ["B", "E", "F"]
    assert record["labelled"] == 3 and record["drawn"] == {"ok": 1, "unscreened": 0, "review": 1, "suspect": 4}
    # E and F are 22 m apart: their labels must still not overlap (boxes in pixels, as drawn)
    renderer = fig.canvas.get_renderer()
    boxes = [t.get_window_extent(renderer) for t in texts]
    assert not any(a.overlaps(b) for i, a in enumerate(boxes) for b in boxes[i + 1:])
    assert record["labels_overlapping"] == 0
    fig, record = plot_status_map(data, crs_label="EPSG:32633")
    assert record["labelled"] == 4  # every suspect


def test_flagged_rows_order():
    status = np.array(["ok", "review", "suspect", "review", "suspect", "unscreened"], dtype=object)
    score = np.array([0.1, 9.0, 4.5, 3.2, 8.0, np.nan])
    assert flagged_rows(status, score).tolist() == [4, 2, 1, 3]


def test_numbers_are_written_for_people():
    assert format_number(None) == "n/a"
    assert format_number(12345) == "12,345"
    assert format_number(301.74912345) == "301.7"
    assert format_number(3968.54321, 3) == "3,969"
    assert format_number(14410.2) == "14,410"  # never "1.441e+04"
    assert format_number(0.000123456) == "0.0001235"
    assert format_length(24015.3) == "24 km" and format_length(850.4) == "850 m" and format_length(2400.0) == "2.4 km"


def test_page_has_no_exponents_and_no_bracketed_plurals(screened):
    shown = re.sub(r"<(script|style)[^>]*>.*?</\1>", " ", screened["html"], flags=re.S)
    shown = re.sub(r'(src|title|data-sort)="[^"]*"', " ", shown)
    assert not re.search(r"\d\.?\d*e[+-]\d\d", shown), re.search(r".{40}\d\.?\d*e[+-]\d\d.{20}", shown)
    assert "(s)" not in shown


# --------------------------------------------------------------------------- describe and the command line

def test_describe_report_without_a_screen_says_what_is_missing(tmp_path):
    import jsonschema

    source = write_points(build_wells(150, seed=4), tmp_path / "wells.gpkg")
    html_path, json_path = tmp_path / "d.html", tmp_path / "d.json"
    code = main(["describe", str(source), "--value", "level_m", "--id", "well_id", "--report", str(html_path),
                 "--summary-json", str(json_path), "--bin-width", "5"])
    assert code == 0
    summary = json.loads(json_path.read_text())
    jsonschema.validate(summary, json.loads(SCHEMA_PATH.read_text()), cls=jsonschema.Draft202012Validator)
    assert summary["command"] == "describe" and summary["counts"] is None and summary["flagged"] is None
    sections = {s["id"]: s for s in summary["sections"]}
    assert not sections["flagged"]["available"] and not sections["local"]["available"]
    assert sections["distribution"]["available"] and sections["strips"]["available"]
    html = html_path.read_text()
    assert "described, not screened" in html
    assert summary["distribution"]["all"]["n"] == 150
    # the bin width asked for is the one reported, and the counts are numpy's on those edges
    hist = summary["distribution"]["histogram"]
    assert hist["bin_width"] == 5.0 and "given" in hist["rule"]
    values = pyogrio.read_dataframe(source)["level_m"].to_numpy()
    lo, hi = summary["distribution"]["far_fences"]["low"], summary["distribution"]["far_fences"]["high"]
    inner = values[(values >= lo) & (values <= hi)]
    assert hist["counts"] == np.histogram(inner, bins=np.asarray(hist["edges"]))[0].tolist()  # numpy.histogram
    np.testing.assert_allclose(np.diff(hist["edges"])[:-1], 5.0)
    assert summary["title"].startswith("Description of level_m") and "<h1>Description of level_m" in html


def test_describe_report_of_a_screened_layer_uses_its_statuses(screened, tmp_path):
    json_path = tmp_path / "again.json"
    code = main(["describe", str(screened["gpkg"]), "--layer", "screened", "--value", "level_m", "--id", "well_id",
                 "--summary-json", str(json_path)])
    assert code == 0
    summary = json.loads(json_path.read_text())
    assert summary["counts"] == screened["summary"]["counts"]
    local = next(s for s in summary["sections"] if s["id"] == "local")
    assert not local["available"] and "screened before" in local["note"]
    assert [r["row"] for r in summary["flagged"]["rows"]] == [r["row"] for r in screened["summary"]["flagged"]["rows"]]


def test_cli_refuses_to_replace_a_report_without_overwrite(tmp_path):
    source = write_points(build_wells(60, seed=2), tmp_path / "wells.gpkg")
    existing = tmp_path / "report.html"
    existing.write_text("keep me")
    runner = CliRunner()
    from pointsift.cli import cli

    result = runner.invoke(cli, ["screen", str(source), "--value", "level_m", "--out", str(tmp_path / "o.gpkg"),
                                 "--report", str(existing)], standalone_mode=False)
    assert result.exception is not None and "exists. Pass --overwrite to replace it" in str(result.exception)
    assert existing.read_text() == "keep me"
    assert main(["screen", str(source), "--value", "level_m", "--out", str(tmp_path / "o.gpkg"),
                 "--report", str(existing)]) == 1  # an output problem, as for an existing --out (issue 10, item 12)
    assert main(["screen", str(source), "--value", "level_m", "--out", str(tmp_path / "o2.gpkg"),
                 "--report", str(tmp_path / "missing" / "r.html")]) == 1


def test_report_write_refuses_the_input_and_missing_folders(screened, tmp_path):
    report = build_report(screened["run"].result)
    with pytest.raises(OutputError, match="is the input; pointsift never writes over its input"):
        report.write(tmp_path / "in.gpkg", protect=(str(tmp_path / "in.gpkg"),))
    with pytest.raises(OutputError, match="does not exist"):
        report.write(None, tmp_path / "nowhere" / "s.json")
    assert not (tmp_path / "in.gpkg").exists()


def test_ids_and_reasons_are_shown_as_text_not_markup(tmp_path):
    from pointsift.pipeline import screen_frame

    wells = build_wells(80, seed=8)
    wells["well_id"] = [f'<b>W"{i}&</b>' for i in range(80)]
    wells.loc[10, "level_m"] *= 10.0  # a decimal slip, so the table has a row
    result = screen_frame(wells, ScreenConfig(value="level_m", id="well_id"))
    report = build_report(result)
    page = _parse(report.html)
    assert "<b>W" not in report.html
    shown = {r["cells"][1]["text"] for r in page.table_rows}
    assert '<b>W"10&</b>' in shown


def test_describe_with_screen_reports_the_screens_own_numbers(screened, tmp_path):
    json_path = tmp_path / "with_screen.json"
    code = main(["-q", "describe", screened["run"].input_path, "--value", "level_m", "--id", "well_id", "--with-screen",
                 "--summary-json", str(json_path)])
    assert code == 0
    summary, screen = json.loads(json_path.read_text()), screened["summary"]
    assert summary["command"] == "describe" and summary["title"].startswith("Description of level_m")
    assert summary["counts"] == screen["counts"] and summary["thresholds"] == screen["thresholds"]
    assert summary["flagged"]["neighbourhoods"] and summary["flagged"]["rows"] == screen["flagged"]["rows"]
    assert summary["variogram"]["model"] == screen["variogram"]["model"]  # one function makes both
    assert summary["local_evidence"]["quadrant_counts"] == screen["local_evidence"]["quadrant_counts"]


def test_every_suspect_on_a_crowded_map_is_labelled_by_id_or_by_a_number_in_the_key():
    # 150 suspects packed in a small square among ok points: ids cannot all fit, numbers must
    rng = np.random.default_rng(5)
    n_suspect = 150
    xy = np.vstack([rng.uniform(0, 2000, (n_suspect, 2)), rng.uniform(0, 20_000, (300, 2))])
    status = np.array(["suspect"] * n_suspect + ["ok"] * 300, dtype=object)
    ids = np.array([f"W{i:03d}" for i in range(xy.shape[0])], dtype=object)
    score = np.concatenate([rng.uniform(3.6, 20, n_suspect), rng.uniform(0, 1, 300)])
    data = MapData(xy=xy, values=rng.normal(size=xy.shape[0]), ids=ids, status=status, score=score)
    fig, record = plot_status_map(data, crs_label="EPSG:32633", max_labels=80)
    assert record["labelled"] < n_suspect and record["numbered"] > 0  # the layer is crowded enough to need numbers
    assert record["labelled"] + record["numbered"] == n_suspect and record["labels_left_out"] == 0
    shown = [t.get_text() for t in fig.axes[0].texts]
    by_number = {str(k["number"]): k["id"] for k in record["key"]}
    named = {text for text in shown if text in set(ids)} | {by_number[text] for text in shown if text in by_number}
    assert named == set(ids[:n_suspect])  # every suspect identifiable on the map
    # numbers follow the strength order (strongest first, as the flagged table)
    strength = {ids[i]: score[i] for i in range(n_suspect)}
    ordered = [k["id"] for k in sorted(record["key"], key=lambda k: k["number"])]
    assert ordered == sorted(ordered, key=lambda i: -strength[i])


def test_report_key_lists_the_numbered_suspects(tmp_path):
    wells = build_wells(400, seed=3)
    rng = np.random.default_rng(8)
    slips = rng.choice(400, 60, replace=False)
    wells.loc[slips, "level_m"] = wells.loc[slips, "level_m"] * 10.0  # decimal slips (invented)
    source = write_points(wells, tmp_path / "wells.gpkg")
    run = screen_file(source, tmp_path / "out.gpkg", ScreenConfig(value="level_m", id="well_id", permutations=99))
    report = build_report(run.result, config=ReportConfig(report_labels=5))
    m, counts = report.summary["map"], report.summary["counts"]
    assert counts["suspect"] > 5 and m["labelled"] <= 5
    assert m["labelled"] + m["numbered"] == counts["suspect"] and m["not_numbered"] == 0
    screened = pyogrio.read_dataframe(tmp_path / "out.gpkg", layer="screened")  # independent reader
    for k in m["key"]:
        assert screened.loc[k["row"], "screen_status"] == "suspect" and str(screened.loc[k["row"], "well_id"]) == k["id"]
        assert f'<li><b>{k["number"]}</b> {k["id"]}</li>' in report.html
    assert "carry a number, listed with their ids under the map" in report.html
    _validate = pytest.importorskip("jsonschema")
    _validate.validate(report.summary, json.loads(SCHEMA_PATH.read_text()), cls=_validate.Draft202012Validator)
