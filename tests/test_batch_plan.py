"""Tests of pointsift.batch.plan: plan files, command-line plans and their messages (reference: tomllib, a plain line count).

Every input is invented inside the test (tmp_path); outside references are named beside each check.
"""

from __future__ import annotations

import textwrap
import tomllib

import pytest

from pointsift import batch
from pointsift.config import ScreenConfig
from pointsift.errors import ConfigError
from batch_data import line_of, synthetic_points, write_gpkg


# ---------------------------------------------------------------------------
# plans


def test_plan_reads_defaults_overrides_lengths_and_relative_paths(tmp_path):
    data_dir = tmp_path / "data"
    data_dir.mkdir()
    write_gpkg(data_dir / "north.gpkg", {"wells": synthetic_points(seed=1)})
    plan_path = tmp_path / "plan.toml"
    plan_path.write_text(textwrap.dedent("""
        [batch]
        out_dir = "screened"
        jobs = 2

        [defaults]
        value = "level_m"
        k = 12
        coincident_tolerance = "2 ft"

        [[input]]
        path = "data/*.gpkg"

        [[input]]
        path = "data/north.gpkg"
        name = "north-band"
        graph = "band"
        within = "1.5km"
        sentinels = [-9999, 0]
    """))
    plan = batch.load_plan(plan_path)
    assert plan.out_dir == tmp_path / "screened"
    assert plan.jobs == 2
    first, second = plan.inputs
    assert first.config == ScreenConfig(value="level_m", k=12, coincident_tolerance=0.6096)  # 1 ft = 0.3048 m exactly (international foot)
    assert second.config.graph == "band"
    assert second.config.within == 1500.0  # 1 km = 1000 m (SI)
    assert second.config.sentinels == (-9999.0, 0.0)
    assert second.config.k == 12  # inherited from [defaults]
    assert second.name == "north-band"
    # the command line takes precedence over the plan
    assert batch.load_plan(plan_path, jobs=1, out_dir=tmp_path / "elsewhere").jobs == 1
    assert batch.load_plan(plan_path, out_dir=tmp_path / "elsewhere").out_dir == tmp_path / "elsewhere"


PLAN_WITH_MISTAKES = """\
# quarterly screening
[batch]
out_dir = "out"
jobs = 0

[defaults]
value = "level_m"
detrend = "quadratic"

[[input]]
path = "good.gpkg"
layers = [
  "wells",   # a comment with ] inside
  "springs",
]

[[input]]
path = "good.gpkg"
neighbors = 8
graph = "bnad"
within = "5 leagues"

[[input]]
path = ["good.gpkg", "missing/*.gpkg"]
"""


def test_plan_errors_name_line_key_and_valid_choices(tmp_path):
    write_gpkg(tmp_path / "good.gpkg", {"wells": synthetic_points()})
    plan_path = tmp_path / "plan.toml"
    plan_path.write_text(PLAN_WITH_MISTAKES)
    tomllib.loads(PLAN_WITH_MISTAKES)  # the reference parser accepts the syntax: only values are wrong
    with pytest.raises(ConfigError) as caught:
        batch.load_plan(plan_path)
    message = str(caught.value)
    text = PLAN_WITH_MISTAKES
    second = line_of(text, "[[input]]", line_of(text, "[[input]]"))  # header of the second entry
    # line numbers counted independently in the text
    assert f"plan.toml line {line_of(text, 'jobs = 0')}, [batch], key 'jobs'" in message
    assert f"plan.toml line {line_of(text, 'detrend')}, [defaults], key 'detrend'" in message
    assert "choose one of none, auto, surface1, surface2, polish" in message  # valid choices listed
    assert f"plan.toml line {line_of(text, 'neighbors')}, [[input]] #2, key 'neighbors': unknown key." in message
    assert "Did you mean 'min_neighbours'?" in message
    assert "Valid keys:" in message and " k," in message
    assert f"plan.toml line {line_of(text, 'graph = ', second)}, [[input]] #2, key 'graph'" in message
    assert "choose one of knn, band" in message
    assert f"line {line_of(text, 'within', second)}, [[input]] #2, key 'within'" in message
    assert "(m, km, ft, mi)" in message
    assert f"line {line_of(text, 'missing/')}, [[input]] #3, key 'path': the pattern 'missing/*.gpkg' matches no file" in message
    # every mistake is reported at once, none twice
    assert message.count("\n  - ") == 6


@pytest.mark.parametrize(
    "text, expected",
    [
        ("[defaults]\nvalue = 'level_m'\n", r"lists no inputs"),
        ("[defaults]\nvaule = 'level_m'\n[[input]]\npath = 'good.gpkg'\n",
         r"line 2, \[defaults\], key 'vaule': unknown key. Did you mean 'value'\?"),
        ("[[input]]\npath = 'good.gpkg'\n", r"no value column"),
        ("[batch]\nout_dir = 'o'\n[input]\npath = 'good.gpkg'\nvalue = 'v'\n", r"\[\[input\]\] table \(double brackets\)"),
        ("[defaults]\nvalue = 'v'\nk = 12\nmin_neighbours = 13\n[[input]]\npath = 'good.gpkg'\n",
         r"line 4, \[defaults\], key 'min_neighbours': min_neighbours \(13\) cannot exceed k \(12\)"),
        ("[defaults]\nvalue = 'v'\n[[input]]\npath = 'good.gpkg'\nx = 'e'\n", r"key 'x': x and y .* set both"),
        ("[defaults]\nvalue = 'v'\n[[input]]\npath = 'good.gpkg'\nname = '../up'\n", r"key 'name': '../up' is not usable"),
        ("[defaults]\nvalue = 'v'\nseed = 1.5\n[[input]]\npath = 'good.gpkg'\n", r"key 'seed': expects a whole number"),
        ("value = 'v'\n[[input]]\npath = 'good.gpkg'\n", r"line 1, top level, key 'value': unknown table or key"),
    ],
)
def test_plan_error_messages(tmp_path, text, expected):
    write_gpkg(tmp_path / "good.gpkg", {"wells": synthetic_points()})
    plan_path = tmp_path / "plan.toml"
    plan_path.write_text(text)
    with pytest.raises(ConfigError, match=expected):
        batch.load_plan(plan_path, out_dir=tmp_path / "out")


def test_plan_syntax_error_and_missing_file(tmp_path):
    plan_path = tmp_path / "plan.toml"
    plan_path.write_text("[defaults]\nvalue = level_m\n")
    # tomllib, the reference parser, reports the position of the syntax error
    with pytest.raises(tomllib.TOMLDecodeError, match="line 2"):
        tomllib.loads(plan_path.read_text())
    with pytest.raises(ConfigError, match=r"plan.toml is not valid TOML: .*line 2"):
        batch.load_plan(plan_path)
    with pytest.raises(ConfigError, match="does not exist"):
        batch.load_plan(tmp_path / "nowhere.toml")


def test_plan_from_args_builds_the_same_plan_as_toml(tmp_path):
    write_gpkg(tmp_path / "a.gpkg", {"wells": synthetic_points()})
    plan_path = tmp_path / "plan.toml"
    plan_path.write_text(f'[defaults]\nvalue = "level_m"\nk = 8\n[[input]]\npath = "{tmp_path / "a.gpkg"}"\nby = "well"\n')
    from_toml = batch.load_plan(plan_path, out_dir=tmp_path / "out")
    from_args = batch.plan_from_args([str(tmp_path / "a.gpkg")], out_dir=tmp_path / "out",
                                     options={"value": "level_m", "k": 8}, by="well")
    assert from_args.inputs[0].config == from_toml.inputs[0].config
    assert from_args.inputs[0].by == from_toml.inputs[0].by == "well"
    with pytest.raises(ConfigError, match="k=1 is outside the range: it must be a whole number from 3 to 100"):
        batch.plan_from_args([str(tmp_path / "a.gpkg")], out_dir=tmp_path / "out", options={"value": "v", "k": 1})


# ---------------------------------------------------------------------------
# expansion
