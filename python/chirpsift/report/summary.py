"""The run summary: one JSON document describing a search run, beside its trigger table.

It records what went in (files, sample rate, start time, bank size), the settings as
:meth:`chirpsift.SearchSettings.as_dict` gives them, what the search reported (the
analysed intervals and their total, the live time, as a fraction of the input; gates;
non-finite data left out; segments), the loudest trigger and the versions, so a run can be
understood and repeated from the document alone. The same document is stored in the
trigger table's Parquet metadata.
"""

from __future__ import annotations

import datetime as _dt
import os
import platform

import numpy as np

__all__ = ["SUMMARY_VERSION", "LOUDEST_FIELDS", "loudest", "run_summary"]

#: Version of the document's layout; raised when a field changes meaning or place.
SUMMARY_VERSION = 2

#: Trigger fields copied into the summary for the loudest trigger.
LOUDEST_FIELDS = ("time", "template", "snr", "reweighted_snr", "chi2", "chi2_dof", "m1", "m2", "spin1", "spin2")


def _float_pairs(values) -> list:
    return [[float(a), float(b)] for a, b in values]


def loudest(triggers: np.ndarray) -> dict | None:
    """Return the trigger with the largest reweighted SNR as plain Python values, or ``None``.

    Parameters
    ----------
    triggers : ndarray of :data:`chirpsift.TRIGGER_DTYPE`

    Returns
    -------
    dict or None
        The fields :data:`LOUDEST_FIELDS`; ``None`` for an empty table.
    """
    if len(triggers) == 0:
        return None
    row = triggers[int(np.argmax(triggers["reweighted_snr"]))]
    return {name: row[name].item() for name in LOUDEST_FIELDS}


#: Entries of the search's ``info`` placed at the top of the document (the rest go under
#: ``"search"``).
_TOP_LEVEL = ("settings", "analysed", "live_time", "analysed_fraction", "gates", "gated_time", "excluded",
              "short_stretches")


def _seconds(pairs) -> float:
    return float(sum(b - a for a, b in pairs))


def _search_report(info: dict) -> dict:
    """Keep what else the search reported about itself.

    Segment length, pads, longest template, stretches, ...: every entry of ``info`` not
    recorded elsewhere in the document.
    """
    return {key: value for key, value in info.items() if key not in _TOP_LEVEL}


def run_summary(
    *, command: str, argv, strain, strain_path, dataset, bank, bank_path, config_path, settings, triggers, info,
    wall: float, threads: int, outputs: dict | None = None, extra: dict | None = None,
) -> dict:
    """Build the run summary document.

    Parameters
    ----------
    command : str
        The subcommand (``"search"``, ``"demo"``).
    argv : list of str
        The command-line arguments, as given.
    strain : chirpsift.io.StrainSeries
        The data searched.
    strain_path, bank_path, config_path : str or None
        Files they came from (``None``: made in memory, or no config file).
    dataset : str or None
        HDF5 dataset of the strain.
    bank : chirpsift.Bank
    settings : chirpsift.SearchSettings
        The settings the search ran with.
    triggers : ndarray of :data:`chirpsift.TRIGGER_DTYPE`
    info : dict
        The search's ``full_output`` information.
    wall : float
        Wall time of the run, s.
    threads : int
        Worker threads.
    outputs : dict, optional
        Paths written, by role.
    extra : dict, optional
        Further top-level entries (for example the demo's injection).

    Returns
    -------
    dict
        JSON-ready apart from numpy scalars and non-finite floats, which
        :func:`chirpsift.io.write_json_atomic` converts.
    """
    gates = _float_pairs(info["gates"])
    live_time = float(info.get("live_time", _seconds(info["analysed"])))
    doc = {
        "summary_version": SUMMARY_VERSION,
        "command": command,
        "argv": list(argv),
        "created_utc": _dt.datetime.now(_dt.UTC).isoformat(timespec="seconds"),
        "versions": _versions(),
        "inputs": {
            "strain": {
                "path": None if strain_path is None else os.path.abspath(strain_path),
                "dataset": dataset,
                "source": strain.source,
                "sample_rate": strain.sample_rate,
                "t0": strain.t0,
                "samples": int(strain.data.size),
                "duration": strain.duration,
            },
            "bank": {
                "path": None if bank_path is None else os.path.abspath(bank_path),
                "templates": len(bank),
            },
            "config": None if config_path is None else os.path.abspath(config_path),
        },
        "settings": settings.as_dict(),
        "run": {"threads": int(threads)},
        "counts": {
            "triggers": int(len(triggers)),
            "templates": int(info["templates"]),
            "segments": int(info["segments"]),
            "gates": len(gates),
        },
        "analysed": _float_pairs(info["analysed"]),
        "live_time": live_time,
        "analysed_fraction": float(info.get("analysed_fraction", live_time / strain.duration)),
        "gates": gates,
        "gated_time": float(info.get("gated_time", _seconds(gates))),
        "excluded": _float_pairs(info.get("excluded", [])),
        "short_stretches": _float_pairs(info.get("short_stretches", [])),
        "search": _search_report(info),
        "loudest": loudest(triggers),
        "wall_time_s": wall,
    }
    if outputs:
        doc["outputs"] = {role: os.path.abspath(path) for role, path in outputs.items()}
    if extra:
        doc.update(extra)
    return doc


def _versions() -> dict:
    from .. import __version__

    return {"chirpsift": __version__, "numpy": np.__version__, "python": platform.python_version()}
