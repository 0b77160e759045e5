"""Run configuration files (TOML) for ``chirpsift search``.

A configuration file has up to two tables, with kebab-case keys::

    [input]
    strain = "site_a.npz"        # path; relative paths are relative to this file
    dataset = "strain"           # HDF5 dataset (HDF5 input only)
    sample-rate = 4096.0         # Hz
    t0 = 1000.0                  # s
    bank = "bank.parquet"        # path; relative to this file

    [search]
    f-low = 20.0                 # Hz
    segment-duration = 256.0     # s
    min-snr = 5.5
    peak-window = 1.0         # s
    chi2-bands = 16
    gate-threshold = 50.0
    welch-duration = 4.0   # s
    psd-duration = 1024.0        # s of data per PSD estimate
    bank-cluster = false

The ``[search]`` keys map to the keyword arguments of :func:`chirpsift.search` with
dashes replaced by underscores. Command-line flags override values from the file
(:func:`merge_settings`).
"""

from __future__ import annotations

import math
import os
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

__all__ = ["RunConfig", "load_config", "merge_settings", "SEARCH_KEYS", "INPUT_KEYS"]

# kebab-case key -> (python name, expected kind)
SEARCH_KEYS: dict[str, tuple[str, str]] = {
    "f-low": ("f_low", "positive"),
    "segment-duration": ("segment_duration", "positive"),
    "min-snr": ("min_snr", "positive"),
    "peak-window": ("peak_window", "nonnegative"),
    "chi2-bands": ("chi2_bands", "count"),
    "gate-threshold": ("gate_threshold", "positive"),
    "welch-duration": ("welch_duration", "positive"),
    "psd-duration": ("psd_duration", "positive"),
    "bank-cluster": ("bank_cluster", "bool"),
}
INPUT_KEYS: dict[str, tuple[str, str]] = {
    "strain": ("strain", "path"),
    "dataset": ("dataset", "str"),
    "sample-rate": ("sample_rate", "positive"),
    "t0": ("t0", "real"),
    "bank": ("bank", "path"),
}
_TABLES = {"search": SEARCH_KEYS, "input": INPUT_KEYS}


@dataclass(frozen=True)
class RunConfig:
    """Settings read from a configuration file.

    Attributes
    ----------
    search : dict
        Keyword arguments for :func:`chirpsift.search` (underscore names).
    input : dict
        ``strain``, ``bank`` (resolved paths as str), ``dataset``, ``sample_rate`` (Hz),
        ``t0`` (s); only the keys present in the file.
    path : str or None
        The file they came from.
    """

    search: dict = field(default_factory=dict)
    input: dict = field(default_factory=dict)
    path: str | None = None


def _check_value(value, kind: str, where: str, base: Path):
    if kind == "bool":
        if not isinstance(value, bool):
            raise ValueError(f"{where} must be true or false, got {value!r}")
        return value
    if kind in ("str", "path"):
        if not isinstance(value, str) or not value:
            raise ValueError(f"{where} must be a non-empty string, got {value!r}")
        if kind == "path":
            p = Path(value).expanduser()
            return str(p if p.is_absolute() else base / p)
        return value
    if kind == "count":
        if isinstance(value, bool) or not isinstance(value, int) or value < 1:
            raise ValueError(f"{where} must be a positive integer, got {value!r}")
        return value
    # numeric kinds
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ValueError(f"{where} must be a number, got {value!r}")
    value = float(value)
    if not math.isfinite(value):
        raise ValueError(f"{where} must be finite, got {value!r}")
    if kind == "positive" and value <= 0:
        raise ValueError(f"{where} must be positive, got {value!r}")
    if kind == "nonnegative" and value < 0:
        raise ValueError(f"{where} must be >= 0, got {value!r}")
    return value


def load_config(path) -> RunConfig:
    """Read and validate a TOML run configuration.

    Parameters
    ----------
    path : str or os.PathLike
        TOML file with optional ``[input]`` and ``[search]`` tables (see the module
        docstring for the keys and units).

    Returns
    -------
    RunConfig

    Raises
    ------
    FileNotFoundError
        If the file does not exist.
    ValueError
        For invalid TOML, an unknown table or key (the message lists the allowed ones),
        or a value of the wrong type or range (the message names the key).
    """
    path = Path(os.fspath(path))
    if not path.exists():
        raise FileNotFoundError(f"config file not found: {path}")
    try:
        with open(path, "rb") as fh:
            doc = tomllib.load(fh)
    except tomllib.TOMLDecodeError as exc:
        raise ValueError(f"{path}: invalid TOML ({exc})") from None
    unknown_tables = sorted(set(doc) - set(_TABLES))
    if unknown_tables:
        raise ValueError(
            f"{path}: unknown table(s) or top-level key(s) {unknown_tables}; allowed tables: "
            f"{sorted(_TABLES)}"
        )
    base = path.parent
    out: dict[str, dict] = {"search": {}, "input": {}}
    for table, keys in _TABLES.items():
        if table not in doc:
            continue
        section = doc[table]
        if not isinstance(section, dict):
            raise ValueError(f"{path}: {table!r} must be a table ([{table}]), got {section!r}")
        unknown = sorted(set(section) - set(keys))
        if unknown:
            raise ValueError(
                f"{path}: unknown key(s) {unknown} in [{table}]; allowed keys: {', '.join(keys)}"
            )
        for key, value in section.items():
            name, kind = keys[key]
            out[table][name] = _check_value(value, kind, f"{path}: [{table}] {key}", base)
    return RunConfig(search=out["search"], input=out["input"], path=str(path))


def merge_settings(from_file: dict, from_cli: dict) -> dict:
    """Combine settings, command-line values taking precedence.

    Parameters
    ----------
    from_file : dict
        Values from :class:`RunConfig` (``search`` or ``input``).
    from_cli : dict
        Values from the command line; ``None`` means "not given" and does not override.

    Returns
    -------
    dict
        The union, with every non-None command-line value replacing the file's.
    """
    merged = dict(from_file)
    for key, value in from_cli.items():
        if value is not None:
            merged[key] = value
    return merged
