"""headroom from Python: link budgets, field-log replay and tuning.

Every function here runs a ``headroom`` command in-process, through the
command's own parser and code, and returns the JSON it prints
(``--format json``) as a dict: the keys are the command's by construction.
A refusal raises :class:`HeadroomError` with the command's one-line message;
the command's warnings become Python warnings (:class:`HeadroomWarning`).

Settings of the controller are keyword arguments named by the engine's
setting keys, the keys of ``--set KEY=VALUE`` (``required_snr_db``,
``target_outage``, ``margin_step_db``...). A value is a string with its unit
(``"-12.5dB"``, ``"20dBm"``, ``"1%"``) or a bare number in the unit the key
names (``max_tx_dbm=14``), exactly as on the command line.

CAUTION: transmit power, EIRP, duty cycle and RF exposure limits are set by
regulation and differ by region and band. headroom's numbers are
engineering estimates: check them against the rules that apply where the
radio is used, respect RF exposure limits for people nearby, and defer to
local regulations and licensed practice.
"""

import json
import os
import tempfile
import warnings

import numpy as np

from . import _native
from ._errors import HeadroomError

__all__ = [
    "HeadroomError",
    "HeadroomWarning",
    "budget",
    "path_loss",
    "fade",
    "noise",
    "battery",
    "replay",
    "tune",
    "decisions_frame",
    "run",
    "FIELDS",
    "DECISION_COLUMNS",
    "OUTCOMES",
    "REASONS",
]

__version__ = _native.VERSION

#: The log's column names (a CSV header row, a DataFrame's columns).
FIELDS = tuple(_native.FIELDS)
#: The columns of the per-record decisions, as ``replay --out x.csv`` writes them.
DECISION_COLUMNS = tuple(_native.DECISION_COLUMNS)
#: Names of the outcome codes (``outcome``, ``logged_outcome``), by code.
OUTCOMES = tuple(_native.OUTCOMES)
#: Names of the reason codes (``reason``), by code.
REASONS = tuple(_native.REASONS)


class HeadroomWarning(UserWarning):
    """A warning of a headroom command (a skipped row, a damaged header...)."""


def _warn(lines):
    for line in lines:
        warnings.warn(line, HeadroomWarning, stacklevel=3)


def run(*argv):
    """Run ``headroom ARGV...`` in-process; returns what it prints on stdout.

    ``run("pathloss", "--model", "free-space", "--frequency", "868MHz",
    "--distance", "2km", "--format", "json")``. For commands without a
    wrapper here; prefer the functions below, which return dicts.
    """
    text, lines = _native.run(["headroom", *[os.fspath(a) if isinstance(a, os.PathLike) else str(a) for a in argv]])
    _warn(lines)
    return text


def _text(value, what):
    """A value as the command line takes it: strings as they are, numbers
    in their shortest exact form (``repr``), never a bool or None."""
    if isinstance(value, os.PathLike):
        return os.fspath(value)
    if isinstance(value, str):
        return value
    if isinstance(value, (bool, np.bool_)) or value is None:
        raise TypeError(f"{what}: {value!r} is not a number or a string with a unit")
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, (float, np.floating)):
        return repr(float(value))
    raise TypeError(f"{what}: {value!r} is not a number or a string with a unit")


def _flags(options):
    """Keyword arguments as flags: ``tx_height="30m"`` is ``--tx-height 30m``,
    ``True`` a bare flag, ``False``/``None`` left out, a list repeats it."""
    argv = []
    for key, value in options.items():
        flag = "--" + key.replace("_", "-")
        if value is None or value is False:
            continue
        if value is True:
            argv.append(flag)
        elif isinstance(value, (list, tuple)):
            for v in value:
                argv += [flag, _text(v, key)]
        else:
            argv += [flag, _text(value, key)]
    return argv


def _json(command, positional, options):
    # The positional arguments after `--`: a path may begin with `-`.
    text = run(command, *_flags(options), "--format", "json", "--", *positional)
    return json.loads(text)


def budget(link, **options):
    """``headroom budget LINK --format json`` as a dict.

    ``link`` is a link file (TOML) or a dict of the same tables and keys
    (``{"transmitter": {...}, "path": {...}, "receiver": {...}}``). Other
    options are the command's flags by name (``frequency="2.4GHz"``,
    ``energy="profile.toml"``, ``interval="15min"``). Files a dict names
    (``[energy] profile``) are taken relative to the current directory.
    """
    if isinstance(link, dict):
        energy = link.get("energy")
        if isinstance(energy, dict) and isinstance(energy.get("profile"), (str, os.PathLike)):
            # A link file names its profile relative to itself; a dict has no
            # place, so relative to the current directory.
            link = {**link, "energy": {**energy, "profile": os.path.abspath(os.fspath(energy["profile"]))}}
        toml_text = _native.toml_from_json(json.dumps(link))
        with tempfile.TemporaryDirectory(prefix="headroom-link-") as tmp:
            path = os.path.join(tmp, "link.toml")
            with open(path, "w", encoding="utf-8") as f:
                f.write(toml_text)
            try:
                return _json("budget", [path], options)
            except HeadroomError as e:
                raise HeadroomError(str(e).replace(path, "<dict>")) from None
    return _json("budget", [link], options)


def path_loss(**options):
    """``headroom pathloss --format json``: ``model``, ``frequency``,
    ``distance`` and the model's parameters as keyword arguments."""
    return _json("pathloss", [], options)


def fade(**options):
    """``headroom fade --format json``: a fade margin for an availability,
    or the availability of a margin."""
    return _json("fade", [], options)


def noise(**options):
    """``headroom noise --format json``: thermal noise power and noise
    temperature of a receiver."""
    return _json("noise", [], options)


def battery(profile, **options):
    """``headroom battery PROFILE --format json``: airtime, duty cycle,
    charge per packet, mean current, battery life (``interval="15min"``,
    ``tx=[14, 20]``...)."""
    return _json("battery", [profile], options)


def _setting_flags(settings):
    argv = []
    for key, value in settings.items():
        argv += ["--set", f"{key}={_text(value, key)}"]
    return argv


def _column_flags(columns):
    argv = []
    for field, name in (columns or {}).items():
        argv += ["--column", f"{field}={name}"]
    return argv


def _is_arrays(source):
    if isinstance(source, dict):
        return True
    return hasattr(source, "columns") and hasattr(source, "__getitem__") and not isinstance(source, (str, bytes))


def _as_columns(source, columns):
    """A DataFrame or a dict of arrays as (name, kind, bytes) columns: the
    log's columns (``FIELDS``, or those ``columns`` maps), int64 for whole
    numbers, float64 otherwise (NaN: a reading that was not logged)."""
    wanted = {f.lower() for f in FIELDS} | {str(c).lower() for c in (columns or {}).values()}
    names = list(source.keys()) if isinstance(source, dict) else list(source.columns)
    out = []
    for name in names:
        if str(name).lower() not in wanted:
            continue
        values = source[name]
        if hasattr(values, "to_numpy"):
            kind = getattr(values.dtype, "kind", "f")
            if kind in "iu" and not getattr(values, "hasnans", False):
                values = values.to_numpy(dtype=np.int64)
            else:
                values = values.to_numpy(dtype=np.float64, na_value=np.nan)
        a = np.asarray(values)
        if a.ndim != 1:
            raise HeadroomError(f"column {name}: {a.ndim}-dimensional, a log column is one value per record")
        if a.dtype.kind in "iu":
            if a.dtype.kind == "u" and a.size and a.max() > np.iinfo(np.int64).max:
                raise HeadroomError(f"column {name}: a value above {np.iinfo(np.int64).max}")
            out.append((str(name), "i", np.ascontiguousarray(a, dtype="<i8").tobytes()))
        elif a.dtype.kind in "fb":
            out.append((str(name), "f", np.ascontiguousarray(a, dtype="<f8").tobytes()))
        elif a.dtype.kind == "O":
            try:
                f = np.array([np.nan if v is None else v for v in a], dtype="<f8")
            except (TypeError, ValueError):
                raise HeadroomError(f"column {name}: not numbers") from None
            out.append((str(name), "f", f.tobytes()))
        else:
            raise HeadroomError(f"column {name}: values of type {a.dtype} are not numbers")
    return out


def _decisions(columns):
    return {name: np.frombuffer(data, dtype=dtype) for name, dtype, data in columns}


def replay(source, *, decisions=True, name="arrays", header=None, columns=None, config=None, energy=None, interval=None, strict=False, **settings):
    """``headroom replay ... --format json`` as a dict, plus every record's
    decision as NumPy arrays.

    ``source``: a log file (``.csv`` or ``.hrlog``), a directory of them, a
    list of those, or a log as columns: a pandas DataFrame or a dict of
    arrays with the log's columns (``t_ms``, ``tx_dbm``, ``rssi_dbm``,
    ``noise_dbm`` or ``snr_db``; NaN is a reading that was not logged). A
    log given as columns is read as the CSV log it would be, named ``name``,
    with ``header`` (``{"max_tx_dbm": 14, "required_snr_db": -12.5}``) as its
    header block.

    Keyword arguments: ``config`` (a settings file), ``energy`` (a profile),
    ``interval``, ``strict``, ``columns`` (``{"rssi_dbm": "rssi"}``: a column
    named otherwise) and the controller's settings by key
    (``required_snr_db="-12.5dB"``, ``margin_step_db=0.25``).

    Returns the keys of ``replay --format json`` (``logs``, ``fleet``) and
    ``decisions``: for each log, in the order of ``logs``, a dict of arrays
    named as ``DECISION_COLUMNS`` (``outcome``, ``logged_outcome`` and
    ``reason`` are codes into ``OUTCOMES`` and ``REASONS``; NaN where a
    value does not exist). ``decisions=False`` leaves them out.
    """
    flags = {"config": config, "energy": energy, "interval": interval, "strict": strict}
    arrays = None
    if _is_arrays(source):
        if header is not None and not isinstance(header, dict):
            raise TypeError("header: a dict of header fields")
        head = [(str(k), _text(v, f"header {k}")) for k, v in (header or {}).items()]
        arrays = (name, head, _as_columns(source, columns))
        paths = [name]
    elif isinstance(source, (list, tuple)):
        paths = [os.fspath(p) for p in source]
    else:
        paths = [os.fspath(source)]
    if header is not None and arrays is None:
        raise TypeError("header: only for a log given as columns (a file carries its own)")
    argv = ["headroom", "replay", *_flags(flags), *_column_flags(columns), *_setting_flags(settings), "--format", "json", "--", *paths]
    text, lines, steps, _ = _native.replay(argv, arrays, decisions)
    _warn(lines)
    result = json.loads(text)
    if decisions:
        result["decisions"] = [_decisions(cols) for cols in steps]
    return result


def decisions_frame(result, log=0):
    """The decisions of log ``log`` of a :func:`replay` result as a pandas
    DataFrame, with ``outcome``, ``logged_outcome`` and ``reason`` as
    categories named as in ``replay --out x.csv``."""
    import pandas as pd

    cols = result["decisions"][log]
    frame = pd.DataFrame({k: cols[k] for k in DECISION_COLUMNS})
    for key, names in (("outcome", OUTCOMES), ("logged_outcome", OUTCOMES), ("reason", REASONS)):
        frame[key] = pd.Categorical.from_codes(frame[key].astype("int64"), categories=list(names))
    return frame


def tune(logs, *, sweep=(), columns=None, config=None, energy=None, objective=None, each_device=False, incomparable=False, strict=False, threads=None, **settings):
    """``headroom tune LOGS... --format json`` as a dict.

    ``logs``: a log file, a directory, or a list of them. ``sweep``: the
    ``--sweep`` items (``["margin_step_db=0.25..1:0.25"]``). Keyword
    arguments: ``config``, ``energy``, ``objective`` (``"power"``,
    ``"charge"``, ``"battery-life"``), ``each_device``, ``incomparable``,
    ``strict``, ``threads``, ``columns``, and the controller's settings by
    key, as for :func:`replay`.
    """
    flags = {"config": config, "energy": energy, "objective": objective, "each_device": each_device, "incomparable": incomparable, "strict": strict, "threads": threads}
    paths = [os.fspath(p) for p in logs] if isinstance(logs, (list, tuple)) else [os.fspath(logs)]
    if isinstance(sweep, str):
        sweep = [sweep]
    argv = [*[a for s in sweep for a in ("--sweep", s)], *_flags(flags), *_column_flags(columns), *_setting_flags(settings), "--quiet", "--format", "json", "--", *paths]
    return json.loads(run("tune", *argv))
