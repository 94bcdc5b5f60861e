# %% [markdown]
# # headroom from Python, and a fleet on a Dask cluster
#
# A notebook in percent format (Jupyter, VS Code and `jupytext` open it as
# cells; `python docs/python-notebook.py` runs it whole; the package's
# tests run it too). Set-up, once, from the repository's root:
#
# ```sh
# pip install "./bindings/python[dask]"
# ```
#
# Every function runs a `headroom` command in-process and returns the JSON
# that command prints (`--format json`) as a dict. The logs and links are
# the repository's invented demo scenarios.
#
# CAUTION: transmit power, EIRP, duty cycle and RF exposure limits are set
# by regulation and differ by region and band; these are engineering
# estimates: defer to local regulations and licensed practice.

# %%
import os
import pathlib
import tempfile

import headroom
import headroom.dask

ROOT = pathlib.Path(os.environ.get("HEADROOM_ROOT", pathlib.Path(__file__).resolve().parents[1]))
os.chdir(ROOT)

# %% [markdown]
# ## A link budget, from a file or from a dict

# %%
link = headroom.budget("examples/links/orchard-sensor.toml")
print(f"margin {link['margin_db']:.2f} dB at {link['distance']}")

# The same keys as a dict: change one and evaluate again.
import tomllib  # Python 3.11+; `pip install tomli` before

with open("examples/links/orchard-sensor.toml", "rb") as f:
    spec = tomllib.load(f)
spec["path"]["distance"] = "2.5km"
print(f"at 2.5 km: margin {headroom.budget(spec)['margin_db']:.2f} dB")

# %% [markdown]
# ## Replay a field log: what would the controller have chosen?
# Settings are the engine's keys, as `--set KEY=VALUE` takes them.

# %%
r = headroom.replay("examples/logs/orchard-868.csv", margin_step_db="0.5dB", target_outage="1%")
log = r["logs"][0]
print(f"{log['records']} records, replayed loss {log['outage_fraction']}, logged loss {log['logged']['outage_fraction']}")
print(f"mean power {log['mean_tx_dbm']:.2f} dBm, {log['saving_vs_logged_db']:+.2f} dB against the device")

decisions = headroom.decisions_frame(r)  # pandas: one row per record
print(decisions.groupby("reason", observed=True).size())

# %% [markdown]
# ## A log as a DataFrame
# Columns named as in a CSV log; NaN is a reading that was not logged.
# Here: what if every tenth report had not come back?

# %%
import numpy as np
import pandas as pd

frame = pd.read_csv("examples/logs/orchard-868.csv", comment="#")
frame.loc[frame.index % 10 == 0, ["rssi_dbm", "noise_dbm"]] = np.nan
gappy = headroom.replay(frame, name="orchard, 10 % reports lost", required_snr_db="-12.5dB", max_tx_dbm=14, min_tx_dbm=2)
print(f"unjudged: {gappy['logs'][0]['unjudged']} of {gappy['logs'][0]['records']}")

# %% [markdown]
# ## Tune: which margin step spends least for the loss it allows?

# %%
t = headroom.tune("examples/logs/cattle-collar-915.csv", sweep=["margin_step_db=0.25..1:0.25"], target_outage="2%")
best = t["best"]
print(f"best: candidate {best['candidate']} {best['settings']}, mean power {best['mean_tx_dbm']:.2f} dBm, loss {best['outage_fraction']:.4f}")

# %% [markdown]
# ## A fleet on Dask
# 50 synthetic collars (`headroom synth`), replayed one task per device on a
# two-worker local cluster; the fleet total is the CLI's, bit for bit (the
# engine adds every device's counts and linear sums in the order of the
# logs). On a real cluster, connect to its scheduler instead:
# `Client("tcp://scheduler-host:8786")`, with the logs on a path every
# worker sees, and the package installed on every worker.

# %%
from distributed import Client, LocalCluster

work = pathlib.Path(tempfile.mkdtemp(prefix="headroom-fleet-"))
for k in range(50):
    headroom.run("synth", "--scenario", "examples/scenarios/cattle-collar-915.toml", "--seed", 1000 + k, "--records", 1440, "--out", work / f"collar{k:02d}.csv")

# Two workers as threads of this process (the replay releases the GIL), so
# that the file also runs as a plain script; from a notebook,
# `LocalCluster(n_workers=2)` starts them as processes.
with LocalCluster(n_workers=2, threads_per_worker=1, processes=False, dashboard_address=None) as cluster, Client(cluster) as client:
    fleet = headroom.dask.replay_fleet(work, client=client, target_outage="2%")
here = headroom.replay(work, target_outage="2%", decisions=False)
assert fleet["fleet"] == here["fleet"]
f = fleet["fleet"]
print(f"{f['logs']} collars: loss {f['outage_fraction']:.4f}, mean power {f['mean_tx_dbm']:.2f} dBm, {f['devices_missing_target']} miss 2 %")
