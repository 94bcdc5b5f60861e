"""The package against the `headroom` binary on the bundled examples: the
same JSON, key by key and bit for bit, the same decisions, the same
refusals."""

import glob
import json
import tomllib

import numpy as np
import pandas as pd
import pytest

import headroom

from conftest import ROOT

DEMO_LOGS = sorted(glob.glob("examples/logs/*.csv", root_dir=ROOT)) + sorted(glob.glob("examples/logs/faults/*.csv", root_dir=ROOT))
LINKS = sorted(glob.glob("examples/links/*.toml", root_dir=ROOT))
COLLAR_COLUMNS = {"t_ms": "time_ms", "tx_dbm": "power", "rssi_dbm": "RSSI", "snr_db": "SNR"}


def without_decisions(result):
    return {k: v for k, v in result.items() if k != "decisions"}


def assert_same_keys_and_values(a, b, where=""):
    """Key by key (so a failure names the key), then the whole."""
    if isinstance(a, dict):
        assert list(a) == list(b), f"{where}: keys differ"
        for k in a:
            assert_same_keys_and_values(a[k], b[k], f"{where}.{k}")
    else:
        assert a == b, f"{where}: {a!r} != {b!r}"


@pytest.mark.parametrize("log", DEMO_LOGS)
def test_replay_of_each_demo_log_is_the_cli_json(log, cli_json):
    got = headroom.replay(log)
    assert_same_keys_and_values(without_decisions(got), cli_json("replay", log))
    assert [len(d["t_ms"]) for d in got["decisions"]] == [g["records"] for g in got["logs"]]


def test_settings_are_the_keys_of_set(cli_json):
    log = "examples/logs/cattle-collar-915.csv"
    settings = {"margin_step_db": "0.25dB", "target_outage": 0.02, "max_tx_dbm": 17, "eirp_cap_dbm": "none"}
    got = headroom.replay(log, config="examples/controllers/tuning.toml", **settings)
    want = cli_json(
        "replay",
        log,
        "--config",
        "examples/controllers/tuning.toml",
        *[a for k, v in settings.items() for a in ("--set", f"{k}={v}")],
    )
    assert_same_keys_and_values(without_decisions(got), want)
    assert got["logs"][0]["settings"]["margin_step_db"] == {"value": 0.25, "source": "flag"}


def test_a_directory_and_its_fleet(cli_json):
    got = headroom.replay("examples/logs/faults", required_snr_db=-12.5)
    want = cli_json("replay", "examples/logs/faults", "--set", "required_snr_db=-12.5")
    assert_same_keys_and_values(without_decisions(got), want)
    assert len(got["decisions"]) == len(want["logs"])
    for d, log in zip(got["decisions"], want["logs"]):
        assert len(d["t_ms"]) == log["records"]


def test_columns_named_otherwise(cli_json):
    log = "examples/logs/devices/collar-snr.csv"
    got = headroom.replay(log, columns=COLLAR_COLUMNS, required_snr_db="-15dB")
    want = cli_json(
        "replay", log, *[a for f, n in COLLAR_COLUMNS.items() for a in ("--column", f"{f}={n}")], "--set", "required_snr_db=-15dB"
    )
    assert_same_keys_and_values(without_decisions(got), want)


def test_decisions_are_the_out_csv(cli, tmp_path):
    log = "examples/logs/cattle-collar-915.csv"
    out = tmp_path / "decisions.csv"
    code, _, err = cli("replay", log, "--out", out)
    assert code == 0, err
    want = pd.read_csv(out, keep_default_na=False)
    got = headroom.replay(log)["decisions"][0]
    assert list(got) == list(want.columns) == list(headroom.DECISION_COLUMNS)
    assert len(got["t_ms"]) == len(want)
    np.testing.assert_array_equal(got["t_ms"], want["t_ms"].to_numpy(dtype=np.uint64))
    for col in ("chosen_tx_dbm", "replayed_snr_db", "path_loss_db", "margin_db"):
        # The CSV holds the shortest text of each f32: read back as f32 it is the same value.
        cells = want[col].replace("", "nan").astype(np.float32).to_numpy()
        np.testing.assert_array_equal(got[col], cells, err_msg=col)
    for col, names in (("outcome", headroom.OUTCOMES), ("logged_outcome", headroom.OUTCOMES), ("reason", headroom.REASONS)):
        assert [names[c] for c in got[col]] == list(want[col]), col
    np.testing.assert_array_equal(got["at_max"], want["at_max"].to_numpy() == 1)
    frame = headroom.decisions_frame(headroom.replay(log))
    assert list(frame["reason"].astype(str)) == list(want["reason"])


def test_a_binary_log_is_the_cli_json(cli, cli_json, tmp_path):
    hr = tmp_path / "orchard.hrlog"
    code, _, err = cli("convert", "examples/logs/orchard-868.csv", hr)
    assert code == 0, err
    assert_same_keys_and_values(without_decisions(headroom.replay(hr)), cli_json("replay", hr))


def read_header(path):
    """The `# key: value` lines of a CSV log's header block."""
    header = {}
    with open(path, encoding="utf-8") as f:
        for line in f:
            if not line.startswith("#"):
                break
            text = line.lstrip("#").strip()
            if ":" in text:
                k, v = text.split(":", 1)
                header[k.strip()] = v.strip()
    return header


@pytest.mark.parametrize("log", ["examples/logs/orchard-868.csv", "examples/logs/cattle-collar-915.csv", "examples/logs/faults/feedback-dropout.csv"])
def test_a_dataframe_is_the_csv_log_it_came_from(log, cli_json):
    frame = pd.read_csv(log, comment="#")
    got = headroom.replay(frame, name=log, header=read_header(log))
    assert_same_keys_and_values(without_decisions(got), cli_json("replay", log))
    # A dict of arrays too.
    arrays = {c: frame[c].to_numpy() for c in frame.columns}
    got2 = headroom.replay(arrays, name=log, header=read_header(log))
    assert without_decisions(got2) == without_decisions(got)
    np.testing.assert_array_equal(got2["decisions"][0]["chosen_tx_dbm"], got["decisions"][0]["chosen_tx_dbm"])


def test_arrays_without_a_header_take_the_settings_given(cli_json, tmp_path):
    frame = pd.DataFrame(
        {
            "t_ms": [0, 60000, 120000, 180000],
            "tx_dbm": [14.0, 14.0, 14.0, 14.0],
            "rssi_dbm": [-100.0, np.nan, -110.5, -131.0],
            "noise_dbm": [-117.0, -117.0, -116.0, -117.0],
        }
    )
    path = tmp_path / "four.csv"
    frame.to_csv(path, index=False, na_rep="")
    got = headroom.replay(frame, name=str(path), required_snr_db="-12.5dB", max_tx_dbm=14)
    want = cli_json("replay", path, "--set", "required_snr_db=-12.5dB", "--set", "max_tx_dbm=14")
    assert_same_keys_and_values(without_decisions(got), want)
    assert got["logs"][0]["unjudged"] == 1


def test_refusals_are_the_cli_message(cli):
    cases = [
        (["replay", "examples/logs/no-such-log.csv"], lambda: headroom.replay("examples/logs/no-such-log.csv")),
        (
            ["replay", "examples/logs/orchard-868.csv", "--set", "target_outage=2"],
            lambda: headroom.replay("examples/logs/orchard-868.csv", target_outage=2),
        ),
        (
            ["replay", "examples/logs/orchard-868.csv", "--set", "no_such_setting=1"],
            lambda: headroom.replay("examples/logs/orchard-868.csv", no_such_setting=1),
        ),
        (
            ["replay", "examples/logs/orchard-868.csv", "--set", "margin_step_db=fast"],
            lambda: headroom.replay("examples/logs/orchard-868.csv", margin_step_db="fast"),
        ),
        (["budget", "examples/links/no-such-link.toml"], lambda: headroom.budget("examples/links/no-such-link.toml")),
    ]
    for argv, call in cases:
        code, _, err = cli(*argv)
        assert code != 0 and err.startswith("headroom: error: "), err
        with pytest.raises(headroom.HeadroomError) as e:
            call()
        assert str(e.value) == err.removeprefix("headroom: error: "), argv
        assert "\n" not in str(e.value)
        assert e.value.exit_code == code


def test_a_setting_that_is_not_a_value_is_a_type_error():
    with pytest.raises(TypeError, match="required_snr_db"):
        headroom.replay("examples/logs/orchard-868.csv", required_snr_db=None)


def test_arrays_of_uneven_length_are_refused():
    with pytest.raises(headroom.HeadroomError, match="every column needs one value per record"):
        headroom.replay({"t_ms": [0, 1, 2], "tx_dbm": [1.0, 2.0]}, required_snr_db=-12.5)


def test_warnings_become_python_warnings():
    with pytest.warns(headroom.HeadroomWarning, match="noise_dbm computed as rssi_dbm - snr_db"):
        headroom.replay("examples/logs/devices/collar-snr.csv", columns=COLLAR_COLUMNS, required_snr_db=-15)


@pytest.mark.parametrize("link", LINKS)
def test_budget_of_each_link_file_and_of_its_dict(link, cli_json):
    want = cli_json("budget", link)
    assert_same_keys_and_values(headroom.budget(link), want)
    with open(link, "rb") as f:
        as_dict = tomllib.load(f)
    assert_same_keys_and_values(headroom.budget(as_dict), want)


def test_calculators_are_the_cli(cli_json):
    pl = dict(model="free-space", frequency="868MHz", distance="2km")
    assert headroom.path_loss(**pl) == cli_json("pathloss", "--model", "free-space", "--frequency", "868MHz", "--distance", "2km")
    assert headroom.noise(bandwidth="125kHz", noise_figure_db=6) == cli_json("noise", "--bandwidth", "125kHz", "--noise-figure-db", "6")
    assert headroom.fade(model="rayleigh", availability="99%") == cli_json("fade", "--model", "rayleigh", "--availability", "99%")
    profile = "examples/energy/orchard-868.toml"
    assert headroom.battery(profile, interval="15min", tx=[8, 14]) == cli_json("battery", profile, "--interval", "15min", "--tx", "8", "--tx", "14")


def test_tune_is_the_cli_json(cli_json):
    logs = ["examples/logs/cattle-collar-915.csv", "examples/logs/orchard-868.csv"]
    got = headroom.tune(logs, sweep=["margin_step_db=0.25..1:0.25"], target_outage="2%")
    want = cli_json("tune", *logs, "--sweep", "margin_step_db=0.25..1:0.25", "--set", "target_outage=2%")
    assert_same_keys_and_values(got, want)


def test_an_output_never_replaces_an_input_of_its_command(cli, tmp_path):
    log = tmp_path / "orchard.csv"
    log.write_bytes((ROOT / "examples/logs/orchard-868.csv").read_bytes())
    code, _, err = cli("convert", log, log, "--force")
    with pytest.raises(headroom.HeadroomError) as e:
        headroom.run("convert", log, log, "--force")
    assert str(e.value) == err.removeprefix("headroom: error: ")
    assert log.read_bytes() == (ROOT / "examples/logs/orchard-868.csv").read_bytes()
    # A later command may write what an earlier one read.
    headroom.replay(log)
    headroom.run("synth", "--scenario", "examples/scenarios/cattle-collar-915.toml", "--seed", 1, "--records", 10, "--out", log, "--force")
    assert headroom.replay(log)["logs"][0]["records"] == 10


def test_energy_and_interval_are_the_flags_of_that_name(cli_json):
    log, profile = "examples/logs/orchard-868.csv", "examples/energy/orchard-868.toml"
    got = headroom.replay(log, energy=profile, interval="10min", decisions=False)
    want = cli_json("replay", log, "--energy", profile, "--interval", "10min")
    assert_same_keys_and_values(got, want)
    assert "energy" in got["fleet"] and got["logs"][0]["energy"]["replayed"]["battery_life_days"] > 0


def test_a_dict_names_its_energy_profile_relative_to_the_current_directory(cli_json, tmp_path):
    with open("examples/links/orchard-sensor.toml", "rb") as f:
        spec = tomllib.load(f)
    spec["energy"] = {"profile": "examples/energy/orchard-868.toml", "interval": "15min"}
    got = headroom.budget(spec)
    want = cli_json("budget", "examples/links/orchard-sensor.toml", "--energy", "examples/energy/orchard-868.toml", "--interval", "15min")
    assert got["energy"].pop("profile") == str(ROOT / "examples/energy/orchard-868.toml")
    want["energy"].pop("profile")
    assert got["energy"] == want["energy"]
