"""Fleets of field logs on a Dask cluster (``dask.distributed``).

:func:`replay_fleet` replays each device's log on the workers, one task per
log, each with a fresh controller, as ``headroom replay`` does. A task
returns the log's JSON object and its totals: the engine's ``Summary``,
every count and linear sum, serialised whole. The client adds the totals in
the order of the logs with the engine's own ``Fleet::add``, the code of the
CLI's fleet total, so the fleet object is the CLI's bit for bit: the loss
rate is Σ lost / Σ judged and the mean power 10·log10(Σ mW / Σ records),
never an average of per-device figures.

Two layouts of a fleet:

* **log files**: a list of ``.csv``/``.hrlog`` files or directories of them
  (expanded as the CLI expands them: a directory's logs sorted by name); one
  file per device. Each worker must see the files at the same paths (a
  shared file system or object store mount).
* **Parquet**: one dataset (a ``.parquet`` file or a directory of them, as
  ``pyarrow.dataset`` reads it) with a device column (``device_column``,
  ``"device"`` by default) and the log's columns (``t_ms``, ``tx_dbm``,
  ``rssi_dbm``, ``noise_dbm`` or ``snr_db``; NaN or null is a reading that
  was not logged). Each device's rows, in the order the dataset stores them,
  are its log; devices are replayed in ascending order of their id, each
  named ``DEVICE_COLUMN=ID``. A Parquet log has no header block: the
  device's facts (``required_snr_db``, ``max_tx_dbm``...) come from the
  settings given. Each worker reads only its device's rows (a filter on the
  device column).
"""

import json
import os

from . import _native, _as_columns, _column_flags, _flags, _setting_flags, _warn

__all__ = ["replay_fleet"]


def _replay_path(path, tail):
    """One log file on a worker: its JSON object, its totals, its warnings."""
    text, lines, _, done = _native.replay(["headroom", "replay", *tail, "--", path], None, False)
    (obj,) = json.loads(text)["logs"]
    ((summary, target),) = done
    return obj, summary, target, lines


def _replay_device(dataset, device_column, device, name, columns, tail):
    """One device of a Parquet dataset on a worker."""
    import pyarrow.compute as pc
    import pyarrow.dataset as ds

    table = ds.dataset(dataset, format="parquet").to_table(filter=pc.field(device_column) == device)
    table = table.drop([device_column])
    frame = {c: table.column(c).to_numpy(zero_copy_only=False) for c in table.column_names}
    arrays = (name, [], _as_columns(frame, columns))
    text, lines, _, done = _native.replay(["headroom", "replay", *tail, "--", name], arrays, False)
    (obj,) = json.loads(text)["logs"]
    ((summary, target),) = done
    return obj, summary, target, lines


def _is_parquet(source):
    if isinstance(source, (list, tuple)):
        return False
    p = os.fspath(source)
    if p.lower().endswith(".parquet"):
        return True
    return os.path.isdir(p) and any(n.lower().endswith(".parquet") for n in os.listdir(p))


def replay_fleet(source, client=None, *, device_column="device", columns=None, strict=False, config=None, **settings):
    """Replay a fleet on a Dask cluster; the result of ``headroom replay
    LOGS... --format json`` for those logs.

    ``source``: log files and directories (a path or a list), or a Parquet
    dataset (see the module's documentation for both layouts).
    ``client``: a ``distributed.Client`` (of a ``LocalCluster`` or of a
    scheduler's address, ``Client("tcp://scheduler:8786")``); ``None`` takes
    the current client, or replays in this process if there is none.
    ``config``, ``strict``, ``columns`` and the controller's settings by key
    (``required_snr_db="-12.5dB"``) as for :func:`headroom.replay`.

    Returns ``{"logs": [one object per device], "fleet": {...}}``: the
    fleet object has the keys of the CLI's (``logs``, ``skipped_logs``,
    ``devices_missing_target``, ``worst_outage_fraction``, ``worst_log``,
    the summary keys and ``sums``). The first log that cannot be read or
    replayed raises :class:`headroom.HeadroomError` with the CLI's message.
    """
    tail = [*_flags({"config": config, "strict": strict}), *_column_flags(columns), *_setting_flags(settings), "--format", "json"]
    if client is None:
        try:
            from distributed import get_client

            client = get_client()
        except (ImportError, ValueError):
            client = None
    skipped = []
    if _is_parquet(source):
        import pyarrow.dataset as ds

        dataset = os.fspath(source)
        table = ds.dataset(dataset, format="parquet").to_table(columns=[device_column])
        devices = sorted(table.column(device_column).unique().to_pylist(), key=lambda d: (d is None, d))
        if any(d is None for d in devices):
            raise _errors().HeadroomError(f"{dataset}: rows without a {device_column}: every row needs its device")
        if not devices:
            raise _errors().HeadroomError(f"{dataset}: no rows: a fleet needs at least one device")
        names = [f"{device_column}={d}" for d in devices]
        jobs = [(_replay_device, (dataset, device_column, d, n, columns, tail)) for d, n in zip(devices, names)]
    else:
        paths = [os.fspath(p) for p in source] if isinstance(source, (list, tuple)) else [os.fspath(source)]
        logs, skipped = _native.expand(paths, bool(strict))
        for p, why in skipped:
            _warn([f"warning: {p}: skipped: {why}"])
        names = logs
        jobs = [(_replay_path, (p, tail)) for p in logs]
    if client is None:
        results = [f(*a) for f, a in jobs]
    else:
        futures = [client.submit(f, *a, pure=False) for f, a in jobs]
        # In the order of the logs: the first log that fails is the error,
        # as in the CLI, whichever worker failed first.
        try:
            results = [f.result() for f in futures]
        finally:
            client.cancel(futures)
    objs = []
    parts = []
    for obj, summary, target, lines in results:
        _warn(lines)
        objs.append(obj)
        parts.append((summary, target))
    fleet = json.loads(_native.fleet(parts, names, len(skipped)))
    return {"logs": objs, "fleet": fleet}


def _errors():
    from . import _errors as e

    return e
