"""Fleets on Dask: a LocalCluster of 2 workers against `headroom replay`'s
fleet total, bit for bit; the Parquet layout; refusals."""

import json

import pandas as pd
import pytest

distributed = pytest.importorskip("distributed")

import headroom
import headroom.dask

SCENARIOS = [
    "examples/scenarios/cattle-collar-915.toml",
    "examples/scenarios/faults/feedback-dropout.toml",
    "examples/scenarios/faults/non-finite.toml",
    "examples/scenarios/faults/saturation.toml",
    "examples/scenarios/faults/path-loss-steps.toml",
]
DEVICES = 60
# What the Parquet layout cannot carry (it has no header block): every
# setting a log header holds, given to both sides.
FACTS = {"required_snr_db": "-15dB", "min_tx_dbm": 2, "max_tx_dbm": 20, "steps": "1dB", "antenna_gain_dbi": 0, "eirp_cap_dbm": 36}


@pytest.fixture(scope="module")
def fleet_dir(tmp_path_factory, cli):
    """60 synthetic device logs (`headroom synth`), several scenarios."""
    d = tmp_path_factory.mktemp("fleet")
    for k in range(DEVICES):
        code, _, err = cli(
            "synth", "--scenario", SCENARIOS[k % len(SCENARIOS)], "--seed", 100 + k, "--records", 600 + 37 * k, "--out", d / f"dev{k:03d}.csv"
        )
        assert code == 0, err
    return d


@pytest.fixture(scope="module")
def cluster():
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None) as c:
        with distributed.Client(c) as client:
            yield client


def test_two_workers_give_the_cli_fleet_bit_for_bit(fleet_dir, cluster, cli_json):
    settings = {"target_outage": "2%", "margin_step_db": "0.5dB"}
    got = headroom.dask.replay_fleet(fleet_dir, client=cluster, **settings)
    want = cli_json("replay", fleet_dir, *[a for k, v in settings.items() for a in ("--set", f"{k}={v}")])
    assert list(got["fleet"]) == list(want["fleet"])
    for k in want["fleet"]:
        assert got["fleet"][k] == want["fleet"][k], k
    assert got["fleet"]["logs"] == DEVICES
    assert got["logs"] == want["logs"]
    # Both workers did some of it.
    assert len(cluster.scheduler_info()["workers"]) == 2
    # The totals were pooled, not averaged per device.
    mean_of_rates = sum(g["outage_fraction"] or 0 for g in got["logs"]) / DEVICES
    pooled = got["fleet"]["lost"] / got["fleet"]["judged"]
    assert got["fleet"]["outage_fraction"] == pytest.approx(pooled, rel=1e-6)
    assert pooled != mean_of_rates


def test_a_list_of_paths_keeps_its_order(fleet_dir, cluster, cli_json):
    paths = sorted(fleet_dir.glob("*.csv"), reverse=True)[:7]
    got = headroom.dask.replay_fleet(paths, client=cluster)
    want = cli_json("replay", *paths)
    assert got == want


def test_without_a_client_the_fleet_is_replayed_here(fleet_dir, cli_json):
    paths = sorted(fleet_dir.glob("*.csv"))[:5]
    assert headroom.dask.replay_fleet(paths) == cli_json("replay", *paths)


def test_a_parquet_dataset_with_a_device_column(fleet_dir, cluster, cli_json, tmp_path):
    frames = []
    paths = sorted(fleet_dir.glob("*.csv"))[:20]
    for k, p in enumerate(paths):
        f = pd.read_csv(p, comment="#")
        f.insert(0, "device", k)
        frames.append(f)
    data = pd.concat(frames, ignore_index=True)
    target = tmp_path / "fleet.parquet"
    data.to_parquet(target, index=False)
    got = headroom.dask.replay_fleet(target, client=cluster, **FACTS)
    want = cli_json("replay", *paths, *[a for k, v in FACTS.items() for a in ("--set", f"{k}={v}")])
    for k in want["fleet"]:
        if k == "worst_log":
            worst = paths.index(next(p for p in paths if str(p) == want["fleet"][k]))
            assert got["fleet"][k] == f"device={worst}"
        else:
            assert got["fleet"][k] == want["fleet"][k], k
    for g, w in zip(got["logs"], want["logs"]):
        assert {k: v for k, v in g.items() if k not in ("log", "settings")} == {k: v for k, v in w.items() if k not in ("log", "settings")}

    # A directory of Parquet files is one dataset too.
    parts = tmp_path / "parts"
    parts.mkdir()
    data[data.device < 10].to_parquet(parts / "a.parquet", index=False)
    data[data.device >= 10].to_parquet(parts / "b.parquet", index=False)
    assert headroom.dask.replay_fleet(parts, client=cluster, **FACTS)["fleet"] == got["fleet"]


def test_refusals_are_the_cli_message(fleet_dir, cluster, cli):
    missing = fleet_dir / "no-such-device.csv"
    code, _, err = cli("replay", missing)
    with pytest.raises(headroom.HeadroomError) as e:
        headroom.dask.replay_fleet([missing], client=cluster)
    assert str(e.value) == err.removeprefix("headroom: error: ")
    assert e.value.exit_code == code

    code, _, err = cli("replay", fleet_dir, "--set", "deadband_db=-3dB")
    assert code == 2
    with pytest.raises(headroom.HeadroomError) as e:
        headroom.dask.replay_fleet(fleet_dir, client=cluster, deadband_db="-3dB")
    assert str(e.value) == err.removeprefix("headroom: error: ")
