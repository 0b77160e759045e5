"""The keys that describe a bank to place, read by one function.

One table for ``chirpsift bank --config`` and for the analysis file's ``[bank]`` table.
"""

from __future__ import annotations

import difflib

from .._validate import table_number
from ..spectrum import DESIGN_CURVES
from .place import METHODS
from .region import Region

__all__ = ["PLACEMENT_KEYS", "placement_arguments"]

#: Every key of a ``[bank]`` placement table (kebab-case), with one line of help and the unit.
PLACEMENT_KEYS = {
    "m1": "component-mass range [lo, hi] of the region, Msun",
    "m2": "component-mass range [lo, hi] of the region, Msun",
    "chi1": "aligned-spin range [lo, hi] of the first component (default [0, 0])",
    "chi2": "aligned-spin range [lo, hi] of the second component (default [0, 0])",
    "mtotal": "total-mass range [lo, hi], Msun (optional cut)",
    "mass-ratio": "range [lo, hi] of m_heavier / m_lighter (optional cut)",
    "psd": "design-curve name the bank is placed for (chirpsift.DESIGN_CURVES)",
    "f-low": "lower frequency cutoff of the placement, Hz",
    "minimal-match": "minimal match (default 0.97)",
    "sample-rate": "sample rate whose Nyquist frequency the templates end at, if below ISCO, Hz (default 4096)",
    "seed": "random seed of the placement (default 0)",
    "method": "placement method: auto, lattice or stochastic (default auto)",
    "max-templates": "refuse a region whose metric estimate exceeds this many templates (default 200000)",
}


def _pair(where: str, key: str, value) -> tuple:
    if not (isinstance(value, (list, tuple)) and len(value) == 2):
        raise ValueError(f"{where}: {key} must be a [lo, hi] pair, got {value!r}")
    return tuple(table_number(where, f"{key}[{i}]", v) for i, v in enumerate(value))


def placement_arguments(table: dict, where: str, *, f_low: float | None = None) -> dict:
    """Check a placement table and return the keyword arguments of :func:`chirpsift.place_bank`.

    Parameters
    ----------
    table : dict
        Keys of :data:`PLACEMENT_KEYS` (kebab-case); ``m1``, ``m2`` and ``psd`` required,
        ``f-low`` too unless ``f_low`` gives its default.
    where : str
        Where the table came from, for messages (``"run.toml [bank]"``).
    f_low : float, optional
        Default of ``f-low`` (the analysis's search ``f-low``).

    Returns
    -------
    dict
        ``m1``, ``m2``, ``chi1``, ``chi2``, ``mtotal``, ``mass_ratio`` (as given),
        ``psd``, ``f_low``, ``minimal_match``, ``sample_rate``, ``seed``, ``method`` and,
        when given, ``max_templates``.

    Raises
    ------
    ValueError
        An unknown key (naming the nearest valid one), a missing key, or a bad value.

    Examples
    --------
    >>> from chirpsift.bank.config import placement_arguments
    >>> args = placement_arguments({"m1": [1, 3], "m2": [1, 3], "psd": "gen2-zero-detuned", "f-low": 30},
    ...                            "bank.toml [bank]")
    >>> args["m1"], args["minimal_match"]
    ((1.0, 3.0), 0.97)
    """
    for key in table:
        if key not in PLACEMENT_KEYS:
            near = difflib.get_close_matches(str(key), list(PLACEMENT_KEYS), n=1, cutoff=0.5)
            hint = f"; did you mean {near[0]!r}?" if near else f"; valid keys: {', '.join(PLACEMENT_KEYS)}"
            raise ValueError(f"{where}: unknown key {key!r}{hint}")
    missing = [k for k in ("m1", "m2", "psd") if k not in table]
    if f_low is None and "f-low" not in table:
        missing.append("f-low")
    if missing:
        raise ValueError(f"{where}: missing {', '.join(missing)} (a region to place a bank in)")
    args = {"m1": _pair(where, "m1", table["m1"]), "m2": _pair(where, "m2", table["m2"])}
    for key, name in (("chi1", "chi1"), ("chi2", "chi2"), ("mtotal", "mtotal"), ("mass-ratio", "mass_ratio")):
        if key in table:
            args[name] = _pair(where, key, table[key])
    try:
        Region(**args)
    except ValueError as exc:
        raise ValueError(f"{where}: {exc}") from None
    psd = table["psd"]
    if not isinstance(psd, str) or psd not in DESIGN_CURVES:
        near = difflib.get_close_matches(str(psd), list(DESIGN_CURVES), n=1, cutoff=0.5)
        hint = f"; did you mean {near[0]!r}?" if near else f"; the curves are {', '.join(DESIGN_CURVES)}"
        raise ValueError(f"{where}: psd {psd!r} is not a design curve{hint}")
    args["psd"] = psd
    args["f_low"] = table_number(where, "f-low", table.get("f-low", f_low), positive=True)
    mm = table_number(where, "minimal-match", table.get("minimal-match", 0.97), positive=True)
    if not mm < 1:
        raise ValueError(f"{where}: minimal-match must lie in (0, 1), got {mm!r}")
    args["minimal_match"] = mm
    args["sample_rate"] = table_number(where, "sample-rate", table.get("sample-rate", 4096.0), positive=True)
    args["seed"] = table_number(where, "seed", table.get("seed", 0), integer=True, minimum=0)
    method = table.get("method", "auto")
    if method not in METHODS:
        raise ValueError(f"{where}: method must be one of {', '.join(METHODS)}, got {method!r}")
    args["method"] = method
    if "max-templates" in table:
        args["max_templates"] = table_number(where, "max-templates", table["max-templates"], integer=True, minimum=1)
    return args
