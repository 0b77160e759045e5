"""What the injection commands share: the caution, site and strain arguments, file helpers.

The commands themselves are one module each, as the ``chirpsift`` command line wants them
(``HELP``, ``add_arguments(parser)``, ``run(args) -> int``):

``chirpsift inject`` (:mod:`chirpsift.inject.inject_command`)
    Draw an injection set (Parquet) or read one, and optionally write each site's strain
    with the signals added (``.npz`` with ``strain``, ``sample_rate``, ``t0``, as
    ``search`` reads it).
``chirpsift campaign`` (:mod:`chirpsift.inject.campaign_command`)
    Search each site's strain with the injections added, with the analysis's search
    settings, find coincidences with time-slide background, and write the found/missed
    table (Parquet) and a JSON summary.
``chirpsift sensitivity`` (:mod:`chirpsift.inject.sensitivity_command`)
    From a found/missed table: efficiency against distance (table and PNG), sensitive
    volume, volume-time and range at a chosen threshold (JSON and printed).

Bad input raises ``ValueError``, ``TypeError`` or ``FileNotFoundError`` with a one-line
message, which the command line turns into exit status 2.
"""

from __future__ import annotations

import argparse
import os
from pathlib import Path

import numpy as np

__all__ = [
    "CAUTION",
    "check_folder",
    "pick_sites",
    "range_value",
    "read_injections",
    "site_file",
    "site_set",
    "strain_files",
    "write_strain_npz",
]

#: Printed with every sensitivity figure and stored in every summary.
CAUTION = (
    "Sensitivity depends on the injected population (masses, spins, distances, orientations) and on the "
    "noise the signals were added to; injections into synthetic Gaussian noise measure the search in "
    "synthetic Gaussian noise, not in real detector data. False-alarm rates from time slides assume noise "
    "that is stationary and independent between sites."
)


def site_file(text: str) -> tuple[str, str]:
    """Parse ``SITE=FILE`` (an argparse ``type``)."""
    name, sep, path = text.partition("=")
    if not sep or not name or not path:
        raise argparse.ArgumentTypeError(f"expected SITE=FILE, got {text!r}")
    return name, path


def range_value(values, flag):
    """One value (fixed) or a ``(low, high)`` pair from an ``nargs="+"`` flag; None if absent."""
    if values is None:
        return None
    if len(values) == 1:
        return values[0]
    if len(values) == 2:
        return tuple(values)
    raise ValueError(f"{flag} takes one value or a LOW HIGH pair, got {len(values)} values")


def strain_files(pairs, flag="--strain") -> dict[str, str]:
    """Site name -> strain file from repeated ``SITE=FILE`` flags; a site named twice is an error."""
    out: dict[str, str] = {}
    for name, path in pairs or []:
        if name in out:
            raise ValueError(f"{flag} names site {name!r} twice")
        out[name] = path
    return out


def site_set(path) -> dict:
    """Read the sites of a sites file (:func:`chirpsift.load_sites`), by name."""
    from ..network import load_sites

    return dict(load_sites(path))


def pick_sites(all_sites: dict, names, sites_path) -> dict:
    """Pick the named sites of a site set; a name not in the set is an error naming it and the set."""
    unknown = [n for n in names if n not in all_sites]
    if unknown:
        raise ValueError(f"site {unknown[0]!r} is not in the site set {sites_path} (it has "
                         f"{', '.join(sorted(all_sites)) or 'no sites'})")
    return {n: all_sites[n] for n in names}


def check_folder(path, flag: str) -> Path:
    """Check that ``path`` can be written (its folder exists, it is no folder); return it."""
    out = Path(os.fspath(path)).expanduser()
    folder = out.parent if str(out.parent) else Path(".")
    if not folder.is_dir():
        raise FileNotFoundError(f"{flag} {os.fspath(path)!r}: folder {folder} does not exist")
    if out.is_dir():
        raise ValueError(f"{flag} {os.fspath(path)!r} is a directory")
    return out


def write_strain_npz(path, data, sample_rate: float, t0: float) -> None:
    """Save strain as ``.npz`` (``strain``, ``sample_rate``, ``t0``, as ``read_strain`` reads it), atomically."""
    from ..io import atomic_path

    with atomic_path(path) as tmp, open(tmp, "wb") as fh:  # a file object: savez adds no suffix
        np.savez(fh, strain=np.asarray(data, dtype=np.float64), sample_rate=np.float64(sample_rate),
                 t0=np.float64(t0))


def read_injections(path):
    """Read an injection set written by ``chirpsift inject``.

    Any Parquet file with the fields of :data:`chirpsift.inject.INJECTION_DTYPE` will do;
    returns ``(table, metadata)``.
    """
    from ..io import read_triggers
    from .population import INJECTION_DTYPE, injection_table

    table, meta = read_triggers(path)
    missing = [f for f in INJECTION_DTYPE.names if f not in (table.dtype.names or ())]
    if missing:
        raise ValueError(f"{path}: not an injection set, it lacks the column(s) {', '.join(missing)}")
    out = np.zeros(table.size, dtype=INJECTION_DTYPE)
    for f in INJECTION_DTYPE.names:
        out[f] = table[f]
    return injection_table(out, name=str(path)), meta
