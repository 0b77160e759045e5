"""``chirpsift search``: search one strain file with a template bank.

The flags are generated from the configuration keys (:data:`chirpsift.config.TABLES`):
the search settings from :data:`chirpsift.pipeline.SEARCH_OPTIONS`, the input and run
keys from :data:`chirpsift.config.INPUT_KEYS` and :data:`chirpsift.config.RUN_KEYS`, so
every flag has a config key of the same name and the help shows each default and unit.
"""

from __future__ import annotations

import argparse
import time

from .. import pipeline
from ..config import TABLES, RunConfig, default_text, in_option_terms, load_config, merge_settings
from ..report import plural, run_summary
from ..threads import get_threads, set_threads
from ._errors import UsageError, in_flag_terms
from ._paths import check_output
from ._types import Once, finite_float, nonnegative_float, nonnegative_int, positive_float, positive_int

__all__ = ["HELP", "add_arguments", "run"]

HELP = "search a strain file with a template bank"

_GROUP_TITLES = {"input": "input", "search": "search settings", "run": "running and output"}

#: Number types of the option kinds (ranges beyond these are checked by SearchSettings).
_TYPES = {"positive": positive_float, "nonnegative": nonnegative_float, "real": finite_float,
          "count": positive_int, "order": nonnegative_int}

#: What one value of a single-valued file or name option is, for the "given twice" message.
_ONE = {"strain": "strain file", "bank": "bank file", "dataset": "dataset", "output": "trigger file",
        "summary": "summary file", "sample_rate_attr": "name", "t0_attr": "name"}

#: read_strain keywords that only exist in the Python API, and the flags that set them.
_READ_STRAIN_FLAGS = {"sample_rate_attr": "--sample-rate-attr", "t0_attr": "--t0-attr"}


def _metavar(entry) -> str:
    if entry.kind == "path":
        return "FILE"
    if entry.kind == "text":
        return "NAME"
    if entry.kind in ("count", "order"):
        return "N"
    return {"Hz": "HZ", "s": "S"}.get(entry.unit, "X")


def _help(entry) -> str:
    default = default_text(entry)
    text = entry.help + (f" (default: {default})" if default else "")
    return text.replace("%", "%%")


def add_option_flag(group, entry) -> None:
    """Add the flag of one configuration key or search option (``entry``) to an argument group."""
    flag = f"--{entry.key}"
    if entry.kind == "switch":
        group.add_argument(flag, dest=entry.name, action=argparse.BooleanOptionalAction, default=None,
                           help=_help(entry))
    elif entry.kind == "choice":
        group.add_argument(flag, dest=entry.name, choices=entry.choices, help=_help(entry))
    elif entry.kind in ("path", "text"):
        group.add_argument(flag, dest=entry.name, action=Once, what=_ONE.get(entry.name, "value"),
                           metavar=_metavar(entry), help=_help(entry))
    else:
        group.add_argument(flag, dest=entry.name, type=_TYPES[entry.kind], metavar=_metavar(entry),
                           help=_help(entry))


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Add the flags of ``chirpsift search`` to ``parser``: one per configuration key, plus ``--config``."""
    parser.description = (
        "Search one strain file with a template bank; write the triggers (a Parquet table) and "
        "a JSON run summary. Every flag except --config has a key of the same name in the "
        "[input], [search] or [run] table of the --config file; flags win over the file."
    )
    for table, keys in TABLES.items():
        group = parser.add_argument_group(_GROUP_TITLES[table])
        for entry in keys:
            add_option_flag(group, entry)
        if table == "input":
            group.add_argument("--config", action=Once, what="config file", metavar="FILE.toml",
                               help="TOML file with [input], [search] and [run] tables (keys as the flags)")


def _given(args, keys) -> dict:
    return {entry.name: getattr(args, entry.name) for entry in keys}


def search_settings(from_file: dict, args):
    """Settle a command's search settings: the --config file's ``[search]`` values, overridden by flags."""
    return _settings(merge_settings(from_file, _given(args, pipeline.SEARCH_OPTIONS)))


def _settings(values: dict):
    if values.get("f_low") is None:
        raise UsageError("--f-low is required (or set f-low in the [search] table of the --config file)")
    try:
        return pipeline.SearchSettings.from_mapping(values, where="search settings")
    except (TypeError, ValueError) as exc:
        raise UsageError(in_option_terms(str(exc), "--")) from None


def _read_strain(inputs: dict):
    from ..io import read_strain

    attrs = {name: inputs[name] for name in _READ_STRAIN_FLAGS if inputs.get(name) is not None}
    try:
        return read_strain(inputs["strain"], dataset=inputs.get("dataset"), sample_rate=inputs.get("sample_rate"),
                           t0=inputs.get("t0"), **attrs)
    except (TypeError, ValueError) as exc:
        raise UsageError(in_flag_terms(str(exc), _READ_STRAIN_FLAGS)) from None


def _search(strain, bank, settings, progress: bool):
    try:
        return pipeline.search(strain.data, strain.sample_rate, bank, t0=strain.t0, progress=progress,
                               full_output=True, **settings.as_dict())
    except (TypeError, ValueError) as exc:
        raise UsageError(in_option_terms(str(exc), "--")) from None


def describe_analysed(doc: dict) -> str:
    """Say in one line how much of the data the search analysed (its live time).

    Also in how many segments, what the gates took and what was left out.
    """
    total = doc["inputs"]["strain"]["duration"]
    text = (f"Analysed {doc['live_time']:.6g} s of the {total:.6g} s ({100 * doc['analysed_fraction']:.1f}%) "
            f"in {plural(doc['counts']['segments'], 'segment')}")
    lengths = {s["segment_duration"] for s in doc["search"].get("stretches", [])}
    longest = doc["search"].get("segment_duration")
    if longest is not None:
        text += f" of {'up to ' if len(lengths) > 1 else ''}{longest:g} s"
    gates = doc["counts"]["gates"]
    text += f"; {plural(gates, 'gate')}" + (f" zeroed {doc['gated_time']:.3g} s" if gates else "")
    excluded = sum(b - a for a, b in doc.get("excluded", []))
    if excluded:
        text += f"; {excluded:.6g} s of non-finite data left out"
    return text + "."


def describe_trigger(loud: dict | None) -> str:
    """Describe a trigger: time, template masses, SNR, chi-squared per degree of freedom, reweighted SNR."""
    if loud is None:
        return "no triggers"
    return (
        f"t = {loud['time']:.4f} s, template {loud['m1']:.3f} + {loud['m2']:.3f} Msun, SNR {loud['snr']:.2f}, "
        f"chi2/dof {loud['chi2'] / loud['chi2_dof']:.2f}, reweighted SNR {loud['reweighted_snr']:.2f}"
    )


def run(args) -> int:
    """Run ``chirpsift search`` from parsed arguments (see :func:`add_arguments`)."""
    from ..bank import Bank
    from ..config import INPUT_KEYS, RUN_KEYS
    from ..io import write_json_atomic, write_triggers

    started = time.perf_counter()
    config = load_config(args.config) if args.config else RunConfig()
    inputs = merge_settings(config.input, _given(args, INPUT_KEYS))
    defaults = {k.name: k.default for k in RUN_KEYS}
    run_values = merge_settings(defaults, merge_settings(config.run, _given(args, RUN_KEYS)))
    for key in ("strain", "bank"):
        if not inputs.get(key):
            raise UsageError(f"--{key} is required (or set {key} in the [input] table of the --config file)")
    settings = search_settings(config.search, args)

    # every output is checked before anything is read or computed
    sources = {"strain file (--strain)": inputs["strain"], "bank file (--bank)": inputs["bank"],
               "config file (--config)": args.config}
    output = check_output(run_values["output"], "--output", ".parquet", sources)
    summary_path = check_output(run_values["summary"] or output.with_suffix(".json"), "--summary", ".json",
                                {**sources, "trigger file (--output)": output})

    strain = _read_strain(inputs)
    bank = Bank.load(inputs["bank"])
    if len(bank) == 0:
        raise UsageError(f"--bank {inputs['bank']!r} holds no templates")
    previous_threads = get_threads()
    if run_values["threads"] is not None:
        set_threads(run_values["threads"])
    try:
        threads = get_threads()
        triggers, info = _search(strain, bank, settings, progress=run_values["progress"])
    finally:
        set_threads(previous_threads)
    wall = time.perf_counter() - started

    doc = run_summary(
        command="search", argv=args.argv, strain=strain, strain_path=inputs["strain"], dataset=inputs.get("dataset"),
        bank=bank, bank_path=inputs["bank"], config_path=args.config, settings=settings, triggers=triggers,
        info=info, wall=wall, threads=threads, outputs={"triggers": output, "summary": summary_path},
    )
    write_triggers(output, triggers, doc)
    write_json_atomic(summary_path, doc)

    print(f"Searched {strain.duration:.6g} s of strain from {strain.source} ({strain.sample_rate:g} Hz) with "
          f"{plural(len(bank), 'template')} from {settings.f_low:g} Hz.")
    print(describe_analysed(doc))
    found = f"Found {plural(len(triggers), 'trigger')} with SNR >= {settings.min_snr:g}"
    print(f"{found}. Loudest by reweighted SNR: {describe_trigger(doc['loudest'])}." if len(triggers) else
          f"{found}.")
    print(f"Wrote {output} and {summary_path} in {wall:.1f} s.")
    return 0
