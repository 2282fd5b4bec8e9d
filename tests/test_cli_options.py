"""Tests of pointsift.cli.options: the command line and plans offer exactly the option table.

The reference is the table itself (pointsift.config.OPTIONS) walked entry by
entry, and click's own parsed parameters and the TOML reader (tomllib) for
what the command line and a plan actually accept.
"""

from __future__ import annotations

import textwrap

import click
import pytest
from batch_data import synthetic_points, write_gpkg

from pointsift import batch
from pointsift.cli import cli
from pointsift.config import COMMANDS, OPTIONS, plan_keys
from pointsift.errors import ConfigError

# options each command declares itself (paths and switches of that command only, not in plans)
OWN = {
    "screen": {"input_path", "out_path", "overwrite", "report_path", "summary_json_path"},
    "describe": {"input_path", "out_path", "overwrite", "figures_dir", "with_screen", "report_path", "summary_json_path"},
    "batch": {"inputs", "force", "batch_quiet"},
    "campaigns": {"inputs", "out_path", "overwrite", "report_path"},
}


@pytest.mark.parametrize("command", COMMANDS)
def test_each_command_offers_exactly_its_table_options(command):
    params = {p.name: p for p in cli.commands[command].params}
    expected = {o.dest for o in OPTIONS.values() if command in o.commands}
    assert set(params) - OWN[command] == expected
    for option in OPTIONS.values():
        if command not in option.commands:
            continue
        param = params[option.dest]
        assert param.opts[0] == f"--{option.flag}"
        assert param.required == (command in option.required)
        assert param.help == option.help_text()


def test_campaign_options_are_checked_by_the_table_in_every_callers_words():
    # the same entry checks --min-campaigns on the command line and min_campaigns= in Python
    from click.testing import CliRunner

    from pointsift.campaigns import CampaignConfig
    from pointsift.config import OptionError, ScreenConfig

    with pytest.raises(OptionError, match=r"min_campaigns=2 is outside the range: it must be a whole number, 3 or more"):
        CampaignConfig(ScreenConfig(value="level_m", id="well"), date="measured", min_campaigns=2)
    with pytest.raises(OptionError, match=r"campaign_window='x=1-13'.*months must be 1 to 12"):
        CampaignConfig(ScreenConfig(value="level_m", id="well"), date="measured", campaign_window="x=1-13")
    with pytest.raises(OptionError, match=r"pass date='COLUMN' .* or campaign='COLUMN'"):
        CampaignConfig(ScreenConfig(value="level_m", id="well"))
    result = CliRunner().invoke(cli, ["campaigns", "a.gpkg", "--value", "v", "--id", "w", "--date", "d",
                                      "--min-campaigns", "2", "--out", "o.gpkg"])
    assert result.exit_code == 2 and "--min-campaigns" in result.output and "3 or more" in result.output
    assert {o.name for o in OPTIONS.values() if o.config == "campaign"} == {
        "date", "campaign", "campaign_window", "change_span", "min_campaigns", "min_campaign_readings",
        "change_permutations"}


def test_describe_shows_no_screen_only_option():
    text = cli.commands["describe"].get_help(click.Context(cli.commands["describe"]))
    for flag in ("--suspect-z", "--review-z", "--fdr", "--permutations", "--neighbours", "--within"):
        assert flag not in text
    assert "--strips" in text and "--lag-width" in text


def test_plan_tables_accept_exactly_the_table_keys(tmp_path):
    write_gpkg(tmp_path / "a.gpkg", {"wells": synthetic_points()})
    # every key the table puts in [defaults] is accepted there; one more is refused, naming the valid ones
    samples = {"text": '"level_m"', "int": "5", "float": "0.5", "length": '"500m"', "bool": "false",
               "numbers": "[-9999]", "texts": '["wells"]'}
    lines = []
    for name in plan_keys("defaults"):
        option = OPTIONS[name]
        value = {"layers": '"all"', "sentinels": "[-9999]", "k": "12", "permutations": "99", "graph": '"knn"',
                 "detrend": '"none"', "thousands": '","', "crs": '"EPSG:32633"', "work_crs": '"EPSG:32633"', "suspect_z": "4.0", "review_z": "3.0", "seed": "1",
                 "lag_count": "6", "min_neighbours": "4", "id": '"well"', "x": '"e"', "y": '"n"',
                 "quantity": '"level"', "land_surface_use": '"depth"', "transform": '"none"',
                 "report_points": "2000", "report_title": '"Network"', "command": '"campaigns"',
                 "campaign_window": '"year"', "change_permutations": "199", "date": '"measured"',
                 "campaign": '"round"',
                 "engine": '"dask"', "scheduler": '"tcp://127.0.0.1:8786"', "partition_size": "1000"}.get(
            name, samples.get(option.kind))
        lines.append(f"{name} = {value}")
    defaults = "\n".join(line for line in lines if not line.startswith(("x =", "y =", "by =")))
    plan = tmp_path / "plan.toml"
    plan.write_text(f'[batch]\nout_dir = "out"\njobs = 1\nreport = false\n[defaults]\n{defaults}\n'
                    '[[input]]\npath = "a.gpkg"\nname = "net"\n')
    loaded = batch.load_plan(plan)
    config = loaded.inputs[0].config
    assert config.lag_width == 500.0 and config.within == 500.0  # lengths with units, as docs/batch.md promises
    assert config.graph == "knn" and config.k == 12
    # the report options reach the entry as a ReportConfig (batch carries configs, never dicts)
    assert loaded.inputs[0].report_config.report_points == 2000 and loaded.inputs[0].report_config.report_title == "Network"
    # and the campaign keys a CampaignConfig, with the same screen options inside
    campaign = loaded.inputs[0].campaign
    assert loaded.inputs[0].command == "campaigns" and campaign.campaign_window == "year" and campaign.screen == config
    known = set(plan_keys("defaults")) | set(plan_keys("input")) | set(plan_keys("batch"))
    assert known == {o.name for o in OPTIONS.values() if o.plan}
    plan.write_text('[defaults]\nvalue = "level_m"\nsuspect_zz = 4\n[[input]]\npath = "a.gpkg"\n')
    with pytest.raises(ConfigError) as caught:
        batch.load_plan(plan, out_dir=tmp_path / "o")
    message = str(caught.value)
    assert "key 'suspect_zz': unknown key. Did you mean 'suspect_z'?" in message
    listed = message.split("Valid keys: ")[1].rstrip(".").split(", ")
    assert sorted(listed) == sorted(plan_keys("defaults"))


def test_plan_messages_use_plan_words(tmp_path):
    write_gpkg(tmp_path / "a.gpkg", {"wells": synthetic_points(crs=None)})
    plan = tmp_path / "plan.toml"
    plan.write_text(textwrap.dedent("""
        [batch]
        out_dir = "out"
        [defaults]
        value = "level_m"
        permutations = 99
        [[input]]
        path = "a.gpkg"
    """))
    result = batch.run_batch(batch.load_plan(plan))
    message = result.outcomes[0].message
    assert 'Pass crs = "EPSG:XXXX"' in message and "--crs" not in message and "(plan entry: plan.toml" in message
