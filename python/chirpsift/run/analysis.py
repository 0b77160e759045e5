"""The analysis file: one TOML document describing a whole run of ``chirpsift run``.

Keys are kebab-case; every key is listed once, in :data:`SCHEMA`, with its meaning and
unit, and the README's table is checked against it. Relative paths are relative to the
analysis file's folder. An unknown key is an error naming the key and the nearest valid
one. Layout::

    version = 1                       # this format's version (optional)
    output = "results"                # output folder

    [sites]
    file = "sites.toml"               # a sites file (chirpsift.load_sites), or inline:
    # [[sites.site]] tables with the keys of a sites file's [[site]] tables

    [data.Kestrel]                    # one table per site to analyse (at least two)
    files = ["kestrel/*.npz"]         # strain files or glob patterns, any order
    vetoes = "kestrel-vetoes.txt"     # a veto file, or [[start, end], ...] in s
    dataset = "strain"                # HDF5 dataset (HDF5 files only)
    sample-rate = 4096.0              # Hz, where files hold none
    sample-rate-attr = "sample_rate"  # name of the sample-rate attribute / npz array
    t0-attr = "t0"                    # name of the start-time attribute / npz array

    [bank]
    file = "bank.parquet"             # a template bank (chirpsift.Bank.load), or a region
    # to place one in (chirpsift.place_bank), instead of file:
    # m1 = [1.0, 3.0]                 # Msun, component-mass ranges
    # m2 = [1.0, 3.0]
    # chi1 = [-0.5, 0.5]              # aligned-spin ranges (default [0, 0])
    # psd = "gen2-zero-detuned"       # the design curve the bank is placed for
    # minimal-match = 0.97

    [search]                          # chirpsift.SearchSettings keys (f-low required)
    f-low = 20.0

    [network]
    slides = 1000                     # time slides of the background
    slide-step = 3.0                  # s between slides (default: from the windows)
    allowance = 0.005                 # s added to each pair's light travel time

    [injections]                      # optional: simulated signals and sensitivity
    count = 100                       # number of simulated binaries
    m1 = [1.2, 2.0]                   # Msun: a range (uniform) or one value
    m2 = [1.2, 2.0]
    distance = [5.0, 200.0]           # Mpc
    distance-distribution = "volume"  # volume, uniform or log
    seed = 1
    found-ifar = 0.0                  # years: IFAR a matched coincidence needs to count as found

    [report]
    top = 10                          # candidates listed in the report

    [engine]                          # optional: where units run (chirpsift.distributed)
    kind = "local"                    # process (default), local, scheduler, htcondor, slurm
    workers = 2
"""

from __future__ import annotations

import dataclasses
import difflib
import hashlib
import math
import os
from dataclasses import dataclass
from pathlib import Path

from .._validate import table_number
from ..bank.config import PLACEMENT_KEYS, placement_arguments
from ..distributed.settings import ENGINE_KEYS, EngineSettings, engine_settings
from ..io.readers import read_toml
from ..network import Site, load_sites
from ..network.coincidence import DEFAULT_ALLOWANCE
from ..pipeline.settings import SEARCH_OPTIONS, SearchSettings

__all__ = ["Analysis", "SiteData", "load_analysis", "write_analysis", "SCHEMA", "FORMAT_VERSION"]

#: Version of the analysis-file layout.
FORMAT_VERSION = 1

_SITE_KEYS = tuple(f.name for f in dataclasses.fields(Site))

#: Every key of the analysis file: table -> {key: one line of help, with the unit}.
#: ``data.SITE`` stands for each ``[data.<site name>]`` table; ``search`` takes the keys
#: of :data:`chirpsift.pipeline.SEARCH_OPTIONS`.
SCHEMA: dict[str, dict[str, str]] = {
    "": {
        "version": f"format version of the analysis file (optional; {FORMAT_VERSION})",
        "output": "output folder for every table, summary and the report (relative to the file)",
        "sites": "table: where the sites come from",
        "data": "table of tables: one [data.<site>] per site to analyse",
        "bank": "table: the template bank",
        "search": "table: search settings",
        "network": "table: coincidence and time-slide settings",
        "injections": "table: simulated signals and sensitivity (optional)",
        "report": "table: report settings (optional)",
        "engine": "table: where the units run and how the bank and the data are split into units (optional)",
    },
    "sites": {
        "file": "a sites file in chirpsift.load_sites format",
        "site": "inline [[sites.site]] tables with the keys of a sites file (instead of file)",
    },
    "data.SITE": {
        "files": "strain files or glob patterns (a string or a list), in any order: .h5/.hdf5, .npz, .npy",
        "vetoes": "times to leave out: a veto file (text or TOML) or a list of [start, end] pairs, s",
        "dataset": "HDF5 dataset holding the strain (HDF5 files only)",
        "sample-rate": "sample rate in Hz, for files that hold none (checked against those that do)",
        "sample-rate-attr": "name of the attribute (HDF5) or array (.npz) holding the sample rate",
        "t0-attr": "name of the attribute (HDF5) or array (.npz) holding the start time (s)",
    },
    "bank": {
        "file": "template bank file (.parquet or .npz, as chirpsift.Bank.save writes); or a region to place "
                "a bank in (chirpsift.place_bank) with the keys below",
        **PLACEMENT_KEYS,
    },
    "search": {o.key: f"{o.help}" + (f" ({o.unit})" if o.unit else "") for o in SEARCH_OPTIONS},
    "network": {
        "slides": "number of time slides of the background (0: no false-alarm rates)",
        "slide-step": "seconds between slides (default: the smallest whole second above the coincidence "
                      "window plus twice the peak window)",
        "allowance": f"timing allowance added to each pair's light travel time, s (default {DEFAULT_ALLOWANCE:g})",
    },
    "injections": {
        "count": "number of simulated binaries, spread over the time all sites analysed",
        "m1": "first component mass in solar masses: one value or a [low, high] range (uniform)",
        "m2": "second component mass in solar masses: one value or a [low, high] range (uniform)",
        "spin1": "aligned spin of the first component: one value or a [low, high] range (default 0)",
        "spin2": "aligned spin of the second component: one value or a [low, high] range (default 0)",
        "distance": "[low, high] luminosity distance in Mpc",
        "distance-distribution": "density of the distance: 'volume' (default), 'uniform' or 'log'",
        "seed": "seed of the draw (default 0); the same seed gives the same set",
        "found-ifar": "years: a matched coincidence counts as found when its IFAR reaches this (default 0: "
                      "every match)",
    },
    "report": {
        "top": "number of loudest candidates listed in the report (default 10)",
    },
    "engine": dict(ENGINE_KEYS),
}


@dataclass(frozen=True)
class SiteData:
    """One site's input: strain files (as given, patterns kept) and vetoes.

    Attributes
    ----------
    files : tuple of str
        Absolute paths or glob patterns.
    vetoes : str, tuple of (float, float), or None
        An absolute veto-file path, the intervals (s), or None.
    dataset : str or None
        HDF5 dataset.
    sample_rate : float or None
        Hz.
    sample_rate_attr, t0_attr : str
        Metadata names.
    """

    files: tuple[str, ...]
    vetoes: str | tuple[tuple[float, float], ...] | None = None
    dataset: str | None = None
    sample_rate: float | None = None
    sample_rate_attr: str = "sample_rate"
    t0_attr: str = "t0"


@dataclass(frozen=True)
class Analysis:
    """A loaded analysis file (see the module docstring for the keys).

    Attributes
    ----------
    path : Path
        The analysis file.
    output : Path
        Output folder (absolute).
    sites : tuple of Site
        The analysed sites, in the order of the sites given (the first is never slid).
    data : dict of str to SiteData
        Per site name, its input.
    bank_file : Path or None
        Template bank file, or None when the bank is placed.
    bank_region : dict or None
        Keyword arguments of :func:`chirpsift.place_bank` when the bank is placed.
    search : SearchSettings
        Search settings.
    slides : int
        Number of time slides.
    slide_step : float or None
        Seconds between slides; None for the default.
    allowance : float
        Timing allowance, s.
    top : int
        Candidates listed in the report.
    injections : dict or None
        The ``[injections]`` table checked, with underscore names (``count``, ``m1``,
        ``m2``, ``spin1``, ``spin2``, ``distance``, ``distance_distribution``, ``seed``,
        ``found_ifar``), or None for no injection campaign.
    engine : chirpsift.distributed.EngineSettings
        Where the units run (not part of the settings hash: a run may resume on another
        engine) and the templates and seconds of data per search unit (part of it: they
        decide the plan).
    """

    path: Path
    output: Path
    sites: tuple[Site, ...]
    data: dict[str, SiteData]
    bank_file: Path | None
    search: SearchSettings
    slides: int = 0
    slide_step: float | None = None
    allowance: float = DEFAULT_ALLOWANCE
    top: int = 10
    injections: dict | None = None
    engine: EngineSettings = EngineSettings()
    bank_region: dict | None = None

    @property
    def site_names(self) -> list[str]:
        """Names of the analysed sites, in order."""
        return [s.name for s in self.sites]

    def canonical(self) -> dict:
        """Return everything that decides the results, as plain JSON-friendly values.

        The output folder and the analysis file's own path are left out (moving a run
        changes nothing), and so are ``top`` (it only changes how much the report lists)
        and the engine (where units run changes no result), but not the templates and
        seconds per unit, which decide the plan's units.
        """
        return {
            "format": FORMAT_VERSION,
            "sites": [{k: getattr(s, k) for k in _SITE_KEYS} for s in self.sites],
            "data": {n: {"files": list(d.files),
                         "vetoes": d.vetoes if isinstance(d.vetoes, (str, type(None))) else [list(v) for v in d.vetoes],
                         "dataset": d.dataset, "sample_rate": d.sample_rate,
                         "sample_rate_attr": d.sample_rate_attr, "t0_attr": d.t0_attr}
                     for n, d in self.data.items()},
            "bank": str(self.bank_file) if self.bank_region is None else self.bank_region,
            "search": self.search.as_dict(),
            "network": {"slides": self.slides, "slide_step": self.slide_step, "allowance": self.allowance},
            "injections": self.injections,
            "units": {"templates_per_unit": self.engine.templates_per_unit,
                      "seconds_per_unit": float(self.engine.seconds_per_unit)},
        }

    def settings_hash(self) -> str:
        """SHA-256 (hex) of :meth:`canonical` as canonical JSON: the run's identity."""
        from ..io.atomic import to_json

        return hashlib.sha256(to_json(self.canonical(), sort_keys=True).encode()).hexdigest()


def _nearest(key: str, valid) -> str:
    near = difflib.get_close_matches(key, list(valid), n=1, cutoff=0.5)
    return f"; did you mean {near[0]!r}?" if near else f"; valid keys: {', '.join(valid)}"


def _check_keys(where: str, table: dict, valid) -> None:
    for key in table:
        if key not in valid:
            raise ValueError(f"{where}: unknown key {key!r}{_nearest(str(key), valid)}")


def _table(doc: dict, key: str, where: str, required: bool = True) -> dict:
    value = doc.get(key)
    if value is None:
        if required:
            raise ValueError(f"{where}: the [{key}] table is required")
        return {}
    if not isinstance(value, dict):
        raise ValueError(f"{where}: {key} must be a table ([{key}]), got {value!r}")
    return value


def _string(where: str, key: str, value) -> str:
    if not isinstance(value, str) or not value:
        raise ValueError(f"{where}: {key} must be a non-empty string, got {value!r}")
    return value


def _path(base: Path, where: str, key: str, value) -> Path:
    text = _string(where, key, value)
    p = Path(os.path.expanduser(text))
    return p if p.is_absolute() else base / p


def _inline_sites(where: str, entries) -> dict[str, Site]:
    if not isinstance(entries, list) or not entries or not all(isinstance(e, dict) for e in entries):
        raise ValueError(f"{where}: [[sites.site]] must be one or more tables, got {entries!r}")
    sites: dict[str, Site] = {}
    for n, entry in enumerate(entries, 1):
        label = f"{where}: [[sites.site]] #{n}"
        _check_keys(label, entry, _SITE_KEYS)
        try:
            site = Site(**entry)
        except (TypeError, ValueError) as exc:
            raise ValueError(f"{label}: {exc}") from None
        if site.name in sites:
            raise ValueError(f"{label}: site name {site.name!r} appears more than once")
        sites[site.name] = site
    return sites


def _site_data(base: Path, where: str, table) -> SiteData:
    if not isinstance(table, dict):
        raise ValueError(f"{where} must be a table, got {table!r}")
    _check_keys(where, table, SCHEMA["data.SITE"])
    if "files" not in table:
        raise ValueError(f"{where}: files (strain files or glob patterns) must be given")
    files = table["files"]
    files = [files] if isinstance(files, str) else files
    if not isinstance(files, list) or not files:
        raise ValueError(f"{where}: files must be a path, a glob pattern or a non-empty list of them, got {files!r}")
    resolved = tuple(str(_path(base, where, "files", f)) for f in files)
    vetoes = table.get("vetoes")
    if isinstance(vetoes, str):
        vetoes = str(_path(base, where, "vetoes", vetoes))
    elif vetoes is not None:
        from ..io.vetoes import check_vetoes

        try:
            vetoes = tuple(check_vetoes(vetoes, name=f"{where}: vetoes"))
        except (TypeError, ValueError) as exc:
            raise ValueError(str(exc)) from None
    rate = table.get("sample-rate")
    return SiteData(
        files=resolved,
        vetoes=vetoes,
        dataset=None if "dataset" not in table else _string(where, "dataset", table["dataset"]),
        sample_rate=None if rate is None else table_number(where, "sample-rate", rate, positive=True),
        sample_rate_attr=_string(where, "sample-rate-attr", table.get("sample-rate-attr", "sample_rate")),
        t0_attr=_string(where, "t0-attr", table.get("t0-attr", "t0")),
    )


def _range(where: str, key: str, value, *, positive=True, bound=None):
    values = value if isinstance(value, list) else [value]
    if not 1 <= len(values) <= 2:
        raise ValueError(f"{where}: {key} must be one value or a [low, high] range, got {value!r}")
    out = [table_number(where, key, v, minimum=None if bound else 0.0) for v in values]
    if positive and min(out) <= 0:
        raise ValueError(f"{where}: {key} must be positive, got {value!r}")
    if bound is not None and max(abs(v) for v in out) >= bound:
        raise ValueError(f"{where}: {key} must lie strictly between -{bound:g} and {bound:g}, got {value!r}")
    if len(out) == 2 and not out[0] <= out[1]:
        raise ValueError(f"{where}: {key} range must be [low, high] with low <= high, got {value!r}")
    return out[0] if len(out) == 1 else out


def _injections(where: str, table: dict) -> dict | None:
    if not table:
        return None
    _check_keys(where, table, SCHEMA["injections"])
    for key in ("count", "m1", "m2", "distance"):
        if key not in table:
            raise ValueError(f"{where}: {key} must be given")
    distance = _range(where, "distance", table["distance"], positive=False)
    if not isinstance(distance, list) or not distance[0] < distance[1]:
        raise ValueError(f"{where}: distance must be a [low, high] range in Mpc with low < high, "
                         f"got {table['distance']!r}")
    kind = table.get("distance-distribution", "volume")
    if kind not in ("volume", "uniform", "log"):
        raise ValueError(f"{where}: distance-distribution must be 'volume', 'uniform' or 'log', got {kind!r}")
    return {
        "count": table_number(where, "count", table["count"], integer=True, minimum=1),
        "m1": _range(where, "m1", table["m1"]),
        "m2": _range(where, "m2", table["m2"]),
        "spin1": _range(where, "spin1", table.get("spin1", 0.0), positive=False, bound=1.0),
        "spin2": _range(where, "spin2", table.get("spin2", 0.0), positive=False, bound=1.0),
        "distance": distance,
        "distance_distribution": kind,
        "seed": table_number(where, "seed", table.get("seed", 0), integer=True, minimum=0),
        "found_ifar": table_number(where, "found-ifar", table.get("found-ifar", 0.0), minimum=0),
    }


def load_analysis(path) -> Analysis:
    """Read and check an analysis file.

    Parameters
    ----------
    path : str or os.PathLike
        The TOML analysis file (layout in the module docstring, keys in :data:`SCHEMA`).

    Returns
    -------
    Analysis

    Raises
    ------
    FileNotFoundError
        The file, or the sites file it names, does not exist.
    ValueError
        Bad TOML, an unknown key (the message names the nearest valid one), a missing
        required key or a bad value; the message names the file and the table.

    Examples
    --------
    >>> from pathlib import Path
    >>> from chirpsift.run import load_analysis
    >>> _ = Path("a.toml").write_text('''
    ... output = "out"
    ... [sites]
    ... file = "sites.toml"
    ... [data.Kestrel]
    ... files = "k/*.npz"
    ... [data.Heron]
    ... files = "h/*.npz"
    ... [bank]
    ... file = "bank.parquet"
    ... [search]
    ... f-low = 20.0
    ... min-snr = 5.0
    ... [network]
    ... slides = 100
    ... ''')
    >>> from chirpsift.network import EXAMPLE_SITES
    >>> _ = Path("sites.toml").write_text(Path(EXAMPLE_SITES).read_text())
    >>> a = load_analysis("a.toml")
    >>> a.site_names, a.search.min_snr, a.slides, a.output.name
    (['Kestrel', 'Heron'], 5.0, 100, 'out')
    >>> _ = Path("b.toml").write_text(Path("a.toml").read_text().replace("slides", "slide"))
    >>> load_analysis("b.toml")
    Traceback (most recent call last):
    ...
    ValueError: b.toml [network]: unknown key 'slide'; did you mean 'slides'?
    """
    p, doc = read_toml(path, what="analysis file")
    base = p.resolve().parent
    _check_keys(str(p), doc, SCHEMA[""])
    if "version" in doc and doc["version"] != FORMAT_VERSION:
        raise ValueError(f"{p}: version must be {FORMAT_VERSION}, got {doc['version']!r}")
    if "output" not in doc:
        raise ValueError(f"{p}: output (the output folder) must be given")
    output = _path(base, str(p), "output", doc["output"])

    where = f"{p} [sites]"
    sites_table = _table(doc, "sites", str(p))
    _check_keys(where, sites_table, SCHEMA["sites"])
    if ("file" in sites_table) == ("site" in sites_table):
        raise ValueError(f"{where}: give either file (a sites file) or inline [[sites.site]] tables")
    if "file" in sites_table:
        sites_file = _path(base, where, "file", sites_table["file"])
        try:
            known = load_sites(sites_file)
        except ValueError as exc:
            raise ValueError(f"{where}: {exc}") from None
    else:
        known = _inline_sites(where, sites_table["site"])

    data_table = _table(doc, "data", str(p))
    unknown = [n for n in data_table if n not in known]
    if unknown:
        near = difflib.get_close_matches(unknown[0], list(known), n=1, cutoff=0.5)
        hint = f"; did you mean {near[0]!r}?" if near else ""
        raise ValueError(f"{p} [data.{unknown[0]}]: no site named {unknown[0]!r} among the sites "
                         f"({', '.join(known)}){hint}")
    names = [n for n in known if n in data_table]  # the sites' own order
    if len(names) < 2:
        raise ValueError(f"{p}: give [data.<site>] tables for at least two sites (coincidences need two), "
                         f"got {len(names)}: {names}")
    data = {n: _site_data(base, f"{p} [data.{n}]", data_table[n]) for n in names}

    where = f"{p} [bank]"
    bank_table = _table(doc, "bank", str(p))
    _check_keys(where, bank_table, SCHEMA["bank"])
    search = SearchSettings.from_mapping(_table(doc, "search", str(p)), where=f"{p} [search]")
    bank_file, bank_region = _bank(where, base, bank_table, search.f_low)

    where = f"{p} [network]"
    net = _table(doc, "network", str(p), required=False)
    _check_keys(where, net, SCHEMA["network"])
    slides = table_number(where, "slides", net.get("slides", 0), integer=True, minimum=0)
    step = net.get("slide-step")
    step = None if step is None else table_number(where, "slide-step", step, positive=True)
    allowance = table_number(where, "allowance", net.get("allowance", DEFAULT_ALLOWANCE), minimum=0)

    injections = _injections(f"{p} [injections]", _table(doc, "injections", str(p), required=False))

    where = f"{p} [report]"
    rep = _table(doc, "report", str(p), required=False)
    _check_keys(where, rep, SCHEMA["report"])
    top = table_number(where, "top", rep.get("top", 10), integer=True, minimum=1)
    engine = engine_settings(_table(doc, "engine", str(p), required=False), where=f"{p} [engine]", base=base)
    return Analysis(path=p, output=output, sites=tuple(known[n] for n in names), data=data, bank_file=bank_file,
                    search=search, slides=slides, slide_step=step, allowance=allowance, top=top,
                    injections=injections, engine=engine, bank_region=bank_region)


def _bank(where: str, base: Path, table: dict, f_low: float):
    """Read the [bank] table: a file, or the keyword arguments of chirpsift.place_bank."""
    region_keys = [k for k in table if k != "file"]
    if "file" in table:
        if region_keys:
            raise ValueError(f"{where}: give either file or a region ({', '.join(region_keys)}), not both")
        return _path(base, where, "file", table["file"]), None
    if not table:
        raise ValueError(f"{where}: give file (a template bank) or a region to place one in (m1, m2, psd)")
    args = placement_arguments(table, where, f_low=f_low)
    return None, {k: list(v) if isinstance(v, tuple) else v for k, v in args.items()}


def _toml_value(value, where: str) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if not math.isfinite(value):
            raise ValueError(f"{where}: {value!r} has no place in an analysis file")
        return repr(value)
    if isinstance(value, (str, os.PathLike)):
        text = os.fspath(value)
        return '"' + text.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_toml_value(v, where) for v in value) + "]"
    raise TypeError(f"{where}: cannot write a value of type {type(value).__name__} ({value!r})")


def write_analysis(path, analysis: dict) -> Path:
    """Write an analysis file from a mapping with its keys (see :data:`SCHEMA`), atomically.

    Parameters
    ----------
    path : str or os.PathLike
        The TOML file to write; relative paths inside are read relative to it.
    analysis : dict
        Top-level keys (``version``, ``output``) and tables (``sites``, ``data``, ``bank``,
        ``search``, ``network``, ``injections``, ``report``); ``data`` maps site names to
        tables and ``sites`` may hold ``site``, a list of site tables. Keys are checked
        when the file is loaded, not here.

    Returns
    -------
    Path
        ``path``.

    Examples
    --------
    >>> import tomllib
    >>> from chirpsift.run import write_analysis
    >>> p = write_analysis("run.toml", {"output": "out", "bank": {"file": "bank.parquet"},
    ...                                 "data": {"Kestrel": {"files": ["k/*.npz"]}}})
    >>> tomllib.loads(p.read_text())["data"]["Kestrel"]
    {'files': ['k/*.npz']}
    """
    from ..io.atomic import atomic_path

    lines = []
    tables = []
    for key, value in analysis.items():
        if isinstance(value, dict):
            tables.append((key, value))
        else:
            lines.append(f"{key} = {_toml_value(value, key)}")
    for key, table in tables:
        nested = {k: v for k, v in table.items() if isinstance(v, dict)}
        arrays = {k: v for k, v in table.items() if isinstance(v, list) and v and all(isinstance(e, dict) for e in v)}
        plain = {k: v for k, v in table.items() if k not in nested and k not in arrays}
        if plain or not (nested or arrays):
            lines += ["", f"[{key}]"] + [f"{k} = {_toml_value(v, f'{key}.{k}')}" for k, v in plain.items()]
        for name, sub in nested.items():
            lines += ["", f"[{key}.{name}]"] + [f"{k} = {_toml_value(v, f'{key}.{name}.{k}')}" for k, v in sub.items()]
        for name, items in arrays.items():
            for item in items:
                lines += ["", f"[[{key}.{name}]]"] + [f"{k} = {_toml_value(v, f'{key}.{name}.{k}')}"
                                                      for k, v in item.items()]
    out = Path(os.fspath(path))
    with atomic_path(out) as tmp:
        Path(tmp).write_text("\n".join(lines).lstrip("\n") + "\n", encoding="utf-8")
    return out
