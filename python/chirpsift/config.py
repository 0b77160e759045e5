"""Run configuration files (TOML) for ``chirpsift search``, and the keys they may hold.

A configuration file has up to three tables. Their keys are the command-line flags
without the leading dashes, so every flag of ``chirpsift search`` except ``--config``
has a key, and a flag given on the command line wins over the file::

    [input]
    strain = "site_a.h5"          # path; relative paths are relative to this file
    dataset = "strain"            # HDF5 dataset (HDF5 input only)
    sample-rate-attr = "rate"     # HDF5 attribute holding the sample rate (Hz)
    t0-attr = "start"             # HDF5 attribute holding the start time (s)
    bank = "bank.parquet"         # path; relative to this file

    [search]
    f-low = 20.0                  # Hz
    min-snr = 5.5
    peak-window = 1.0             # s, half-width

    [run]
    threads = 4
    output = "triggers.parquet"   # path; relative to this file
    progress = false

``[search]`` holds the options of :class:`chirpsift.SearchSettings` (one key per entry
of :data:`chirpsift.pipeline.SEARCH_OPTIONS`); ``[input]`` and ``[run]`` hold
:data:`INPUT_KEYS` and :data:`RUN_KEYS`. :func:`keys_table` lists them all with units
and defaults.
"""

from __future__ import annotations

import difflib
import re
from dataclasses import dataclass, field
from pathlib import Path

from .io.readers import read_toml
from ._validate import integer, positive_scalar, real_scalar
from .pipeline import SEARCH_OPTIONS, SearchSettings
from .pipeline.settings import option_key

__all__ = [
    "ConfigKey",
    "INPUT_KEYS",
    "RUN_KEYS",
    "TABLES",
    "RunConfig",
    "load_config",
    "merge_settings",
    "default_text",
    "keys_table",
    "in_option_terms",
]


@dataclass(frozen=True)
class ConfigKey:
    """One key of the ``[input]`` or ``[run]`` table (and the flag of the same name).

    Attributes
    ----------
    name : str
        Python name (``sample_rate``); the key and flag are spelled with dashes.
    unit : str
        Unit of the value, ``""`` for none.
    kind : str
        ``"path"`` (relative to the config file), ``"text"``, ``"positive"``, ``"real"``,
        ``"count"`` (integer >= 1) or ``"switch"`` (true/false).
    help : str
        One line for help screens and the README table.
    default : object
        Value used when neither the file nor the command line gives one (``None``: the
        help says what happens).
    """

    name: str
    unit: str
    kind: str
    help: str
    default: object = None

    @property
    def key(self) -> str:
        """Config-file key and command-line flag name (without the leading dashes)."""
        return option_key(self.name)


INPUT_KEYS: tuple[ConfigKey, ...] = (
    ConfigKey("strain", "", "path", "strain file: .npy, .npz, .h5/.hdf5, .txt/.dat/.csv (required)"),
    ConfigKey("dataset", "", "text", "HDF5 dataset holding the strain (HDF5 input only)"),
    ConfigKey("sample_rate", "Hz", "positive",
              "sampling rate: needed where the file stores none, and must agree with the file's where it does"),
    ConfigKey("t0", "s", "real",
              "time of the first sample: needed where the file could store one but does not, and must agree "
              "with the file's where it does"),
    ConfigKey("sample_rate_attr", "", "text", "name of the .npz array or HDF5 dataset attribute holding the "
              "sample rate in Hz", "sample_rate"),
    ConfigKey("t0_attr", "", "text", "name of the .npz array or HDF5 dataset attribute holding the time of the "
              "first sample in s", "t0"),
    ConfigKey("bank", "", "path", "template bank: .npz or .parquet (required)"),
)

RUN_KEYS: tuple[ConfigKey, ...] = (
    ConfigKey("threads", "", "count", "worker threads; default: all cores, or the CHIRPSIFT_THREADS variable"),
    ConfigKey("output", "", "path", "trigger table to write, a .parquet file", "triggers.parquet"),
    ConfigKey("summary", "", "path", "JSON run summary to write, a .json file; default: the output path with .json"),
    ConfigKey("progress", "", "switch", "show a progress bar on stderr", True),
)

#: Table name -> its keys, in the order help screens and the README list them.
TABLES = {"input": INPUT_KEYS, "search": SEARCH_OPTIONS, "run": RUN_KEYS}

_NO_DEFAULT = object()


@dataclass(frozen=True)
class RunConfig:
    """Settings read from a configuration file (only the keys present in the file).

    Attributes
    ----------
    input : dict
        ``[input]`` values by Python name; paths resolved against the file's folder.
    search : dict
        ``[search]`` values by Python name, checked by :class:`chirpsift.SearchSettings`.
    run : dict
        ``[run]`` values by Python name; paths resolved against the file's folder.
    path : str or None
        The file they came from.
    """

    input: dict = field(default_factory=dict)
    search: dict = field(default_factory=dict)
    run: dict = field(default_factory=dict)
    path: str | None = None


def default_of(entry):
    """Return the default of a :class:`ConfigKey` or a search option, or a sentinel if it has none."""
    if isinstance(entry, ConfigKey):
        return entry.default
    return getattr(SearchSettings, entry.name, _NO_DEFAULT)


def default_text(entry, *, unit: bool = True) -> str:
    """Show the default of a key as help screens do: ``"1.0 s"``, ``"on"``.

    ``""`` when the key has no default value (its help says what happens then).
    ``unit=False`` leaves the unit out.

    Examples
    --------
    >>> from chirpsift.config import default_text, TABLES
    >>> [default_text(o) for o in TABLES["search"] if o.key in ("peak-window", "bank-cluster", "f-low")]
    ['', '1.0 s', 'off']
    """
    value = default_of(entry)
    if value is _NO_DEFAULT or value is None:
        return ""
    if isinstance(value, bool):
        return "on" if value else "off"
    return f"{value} {entry.unit}".strip() if unit else str(value)


def _nearest(word: str, valid) -> str:
    near = difflib.get_close_matches(word, list(valid), n=1)
    return f"did you mean {near[0]!r}?" if near else f"valid: {', '.join(valid)}"


def in_option_terms(message: str, prefix: str = "") -> str:
    """Spell the search options' Python names in ``message`` as keys or flags.

    With ``prefix=""`` as config keys, with ``prefix="--"`` as flags:
    ``"segment_duration=4 s"`` -> ``"--segment-duration=4 s"``.

    Examples
    --------
    >>> from chirpsift.config import in_option_terms
    >>> in_option_terms("welch_duration=8.0 s is longer than segment_duration=4.0 s", "--")
    '--welch-duration=8.0 s is longer than --segment-duration=4.0 s'
    """
    names = sorted((o.name for o in SEARCH_OPTIONS), key=len, reverse=True)
    pattern = re.compile(r"(?<![\w-])(" + "|".join(map(re.escape, names)) + r")(?![\w-])")
    return pattern.sub(lambda m: prefix + option_key(m.group(1)), message)


def _check_value(entry: ConfigKey, value, where: str, base: Path):
    label = f"{where}: {entry.key}"
    if entry.kind == "switch":
        if not isinstance(value, bool):
            raise ValueError(f"{label} must be true or false, got {value!r}")
        return value
    if entry.kind in ("text", "path"):
        if not isinstance(value, str) or not value:
            raise ValueError(f"{label} must be a non-empty string, got {value!r}")
        if entry.kind == "path":
            p = Path(value).expanduser()
            return str(p if p.is_absolute() else base / p)
        return value
    check = {"positive": positive_scalar, "real": real_scalar, "count": integer}[entry.kind]
    return check(entry.key, value, where=where)


def _names_in(section: dict, keys, where: str) -> dict:
    """Map a table's keys to Python names, refusing unknown keys and a key given twice.

    An unknown key's message names the nearest valid one; a key may not be given with
    dashes and with underscores both.
    """
    valid = [k.key for k in keys]
    out: dict = {}
    for key, value in section.items():
        name = str(key).replace("-", "_")
        if option_key(name) not in valid:
            raise ValueError(f"{where}: unknown key {key!r}; {_nearest(option_key(name), valid)}")
        if name in out:
            raise ValueError(f"{where}: key {option_key(name)!r} is given twice (with dashes and with underscores)")
        out[name] = value
    return out


def _search_section(section: dict, where: str) -> dict:
    values = _names_in(section, SEARCH_OPTIONS, where)
    # Check the file's values together through the settings type; f-low may come from the
    # command line instead, so any valid value stands in for it here.
    probe = values if "f_low" in values else {**values, "f_low": 10.0}
    try:
        settings = SearchSettings.from_mapping(probe, where=where)
    except (TypeError, ValueError) as exc:
        raise type(exc)(in_option_terms(str(exc))) from None
    return {name: getattr(settings, name) for name in values}


def load_config(path) -> RunConfig:
    r"""Read and validate a TOML run configuration.

    Parameters
    ----------
    path : str or os.PathLike
        TOML file with optional ``[input]``, ``[search]`` and ``[run]`` tables (see the
        module docstring and :func:`keys_table` for the keys and units).

    Returns
    -------
    RunConfig

    Raises
    ------
    FileNotFoundError
        If the file does not exist.
    ValueError, TypeError
        For invalid TOML, an unknown table or key (the message names the nearest valid
        one), or a value of the wrong type or range (the message names the file and key).

    Examples
    --------
    >>> from pathlib import Path
    >>> from chirpsift.config import load_config
    >>> p = Path("run.toml")
    >>> _ = p.write_text('[search]\nf-low = 30\npeak-window = 0.5\n[run]\nprogress = false\n')
    >>> c = load_config(p)
    >>> c.search, c.run
    ({'f_low': 30.0, 'peak_window': 0.5}, {'progress': False})
    """
    path, doc = read_toml(path, what="config file")
    for table, section in doc.items():
        if table not in TABLES:
            home = [t for t, keys in TABLES.items() if option_key(str(table)) in (k.key for k in keys)]
            hint = f"put it under [{home[0]}]" if home else _nearest(table, list(TABLES))
            raise ValueError(f"{path}: unknown table or top-level key {table!r}; {hint}")
        if not isinstance(section, dict):
            raise ValueError(f"{path}: {table!r} must be a table ([{table}]), got {section!r}")
    base = path.parent
    out = {}
    for table, keys in TABLES.items():
        section = doc.get(table, {})
        where = f"{path}: [{table}]"
        if table == "search":
            out[table] = _search_section(section, where)
            continue
        by_name = {k.name: k for k in keys}
        out[table] = {name: _check_value(by_name[name], value, where, base)
                      for name, value in _names_in(section, keys, where).items()}
    return RunConfig(input=out["input"], search=out["search"], run=out["run"], path=str(path))


def merge_settings(from_file: dict, from_cli: dict) -> dict:
    """Combine settings, command-line values taking precedence.

    Parameters
    ----------
    from_file : dict
        Values from :class:`RunConfig` (``input``, ``search`` or ``run``).
    from_cli : dict
        Values from the command line; ``None`` means "not given" and does not override.

    Returns
    -------
    dict
        The union, with every non-None command-line value replacing the file's.

    Examples
    --------
    >>> from chirpsift.config import merge_settings
    >>> merge_settings({"f_low": 20.0, "min_snr": 6.0}, {"f_low": 30.0, "min_snr": None})
    {'f_low': 30.0, 'min_snr': 6.0}
    """
    merged = dict(from_file)
    for key, value in from_cli.items():
        if value is not None:
            merged[key] = value
    return merged


def keys_table() -> str:
    """List every ``chirpsift search`` flag with its config key, unit, default and meaning.

    A Markdown table: the README carries it, and a test checks that it matches.
    """

    def row(*cells) -> str:
        return "|" + "|".join(f" {c} " if c else " " for c in cells) + "|"

    lines = [row("flag", "config key", "unit", "default", "meaning"), row("---", "---", "---", "---", "---")]
    for table, keys in TABLES.items():
        for entry in keys:
            flag = f"`--{entry.key}`" + (f", `--no-{entry.key}`" if entry.kind == "switch" else "")
            lines.append(row(flag, f"`[{table}] {entry.key}`", entry.unit, default_text(entry, unit=False), entry.help))
    lines.append(row("`--config`", "", "", "", "TOML file with the [input], [search] and [run] tables"))
    return "\n".join(lines)
