"""The run manifest: which units of a run are complete, with the bytes they published.

``manifest.json`` in the output folder is written by the driver alone, atomically. It
holds the analysis's settings hash (a run folder belongs to one analysis) and, per unit
key, the files the unit published with their size and SHA-256, and the fingerprint of
the unit's inputs. Rewriting it after every unit would cost time quadratic in the
number of units (285,000 units of a year of two-site data make a manifest of about
100 MB), so each completed unit is appended as one line to ``manifest.journal``
(flushed and fsynced) and the journal is folded into ``manifest.json`` every
:data:`FOLD_EVERY` units and when the driver finishes. Reading the manifest replays the
journal over the snapshot; a torn last line (a driver killed while appending) is
ignored, so that unit is simply redone. A unit counts as complete only when its entry
exists, its fingerprint matches the inputs it would read now, and every file it lists
is present with the recorded size and hash; anything else (a file deleted, truncated,
corrupted, or published by a run killed before its manifest row was written) is redone.

Units never write the manifest, so the same rule serves a run in one process and a run
whose units are executed elsewhere.
"""

from __future__ import annotations

import hashlib
import json
import os
from dataclasses import dataclass, field
from pathlib import Path

from ..io.atomic import to_json, write_json_atomic

__all__ = ["Manifest", "ManifestMismatch", "file_digest", "fingerprint", "read_manifest", "read_units", "MANIFEST_NAME",
           "JOURNAL_NAME"]

#: File name of the manifest in the output folder, and of its journal of recent units.
MANIFEST_NAME = "manifest.json"
JOURNAL_NAME = "manifest.journal"
#: Units appended to the journal between two rewrites of the snapshot: a rewrite costs
#: time in proportion to the manifest, so folding every 256 units keeps the total
#: linear in the number of units while the journal stays short.
FOLD_EVERY = 256
#: Layout version of the manifest.
MANIFEST_VERSION = 1


class ManifestMismatch(ValueError):
    """The output folder holds a run of a different analysis."""


def file_digest(path) -> str:
    """SHA-256 (hex) of a file's bytes, read in 1 MiB blocks.

    Examples
    --------
    >>> from pathlib import Path
    >>> from chirpsift.run.manifest import file_digest
    >>> _ = Path("x.bin").write_bytes(b"abc")
    >>> file_digest("x.bin")[:16]
    'ba7816bf8f01cfea'
    """
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def fingerprint(inputs) -> str:
    """SHA-256 (hex) of a JSON-friendly description of a unit's inputs (canonical JSON)."""
    return hashlib.sha256(to_json(inputs, sort_keys=True).encode()).hexdigest()


def _changed_keys(old, new, prefix="") -> list[str]:
    if isinstance(old, dict) and isinstance(new, dict):
        out = []
        for k in sorted(set(old) | set(new)):
            out += _changed_keys(old.get(k), new.get(k), f"{prefix}.{k}" if prefix else str(k))
        return out
    return [] if old == new else [prefix or "(top level)"]


@dataclass
class Manifest:
    """The manifest of one output folder (module docstring).

    Attributes
    ----------
    folder : Path
        The output folder.
    settings_hash : str
        Settings hash of the analysis the folder belongs to.
    analysis : dict
        The analysis's canonical description (to name what changed).
    units : dict
        Unit key to ``{"stage", "files": {relative path: {"bytes", "sha256"}}, "inputs",
        "rows"}``.
    """

    folder: Path
    settings_hash: str
    analysis: dict
    units: dict = field(default_factory=dict)
    _journalled: int = field(default=0, repr=False)  # units appended since the last snapshot

    @property
    def path(self) -> Path:
        """The manifest file."""
        return self.folder / MANIFEST_NAME

    @classmethod
    def open(cls, folder, settings_hash: str, analysis: dict) -> "Manifest":
        """Open the folder's manifest, or start an empty one.

        Parameters
        ----------
        folder : str or os.PathLike
            Output folder (created if missing).
        settings_hash : str
            The analysis's settings hash.
        analysis : dict
            The analysis's canonical description.

        Returns
        -------
        Manifest

        Raises
        ------
        ManifestMismatch
            The folder holds a run of another analysis (the message names the keys that
            differ), or a manifest that cannot be read.
        """
        folder = Path(os.fspath(folder))
        folder.mkdir(parents=True, exist_ok=True)
        path = folder / MANIFEST_NAME
        if not path.exists():
            return cls(folder, settings_hash, analysis)
        doc = read_manifest(folder)
        old_hash, old_analysis, units = doc["settings_hash"], doc["analysis"], doc["units"]
        if old_hash != settings_hash:
            changed = _changed_keys(old_analysis, json.loads(to_json(analysis)))
            raise ManifestMismatch(
                f"{folder} holds a run of a different analysis (settings hash {old_hash[:12]}, this analysis "
                f"{settings_hash[:12]}; changed: {', '.join(changed[:5]) or 'unknown'}); results of the two would "
                "mix: give a new output folder, or delete this one to start again"
            )
        return cls(folder, settings_hash, analysis, dict(units))

    def complete(self, key: str, inputs_fingerprint: str) -> bool:
        """Whether unit ``key`` is complete for these inputs (module docstring)."""
        entry = self.units.get(key)
        if entry is None or entry.get("inputs") != inputs_fingerprint:
            return False
        for rel, meta in entry["files"].items():
            p = self.folder / rel
            try:
                if p.stat().st_size != meta["bytes"] or file_digest(p) != meta["sha256"]:
                    return False
            except OSError:
                return False
        return True

    def digest(self, key: str) -> dict:
        """``{relative path: sha256}`` of a complete unit's files (inputs of later units)."""
        return {rel: meta["sha256"] for rel, meta in self.units[key]["files"].items()}

    def record(self, key: str, stage: str, files, inputs_fingerprint: str, **extra) -> None:
        """Record a published unit and write the manifest atomically.

        Parameters
        ----------
        key : str
            Unit key.
        stage : str
            Stage name.
        files : iterable of str
            Files the unit published, relative to the output folder.
        inputs_fingerprint : str
            :func:`fingerprint` of its inputs.
        **extra
            JSON-friendly facts about the unit (row counts).
        """
        entry = {"stage": stage, "inputs": inputs_fingerprint,
                 "files": {rel: {"bytes": (self.folder / rel).stat().st_size,
                                 "sha256": file_digest(self.folder / rel)} for rel in files}}
        entry.update(extra)
        self.units[key] = entry
        with open(self.folder / JOURNAL_NAME, "a", encoding="utf-8") as fh:
            fh.write(json.dumps({"key": key, "entry": entry}) + "\n")  # order kept: the snapshot's bytes
            fh.flush()
            os.fsync(fh.fileno())
        self._journalled += 1
        if self._journalled >= FOLD_EVERY:
            self.write()

    def fold(self) -> None:
        """Fold the journal into ``manifest.json`` if it holds anything (the driver's last act)."""
        if self._journalled or (self.folder / JOURNAL_NAME).exists():
            self.write()

    def write(self) -> None:
        """Write the whole manifest atomically, then drop the journal it now contains.

        Units are in key order, so the bytes depend on content only. A crash between the
        two steps leaves a journal whose lines the snapshot already holds: replaying them
        changes nothing.
        """
        write_json_atomic(self.path, {
            "format": "chirpsift-run-manifest",
            "version": MANIFEST_VERSION,
            "settings_hash": self.settings_hash,
            "analysis": self.analysis,
            "units": {k: self.units[k] for k in sorted(self.units)},
        })
        try:
            os.unlink(self.folder / JOURNAL_NAME)
        except FileNotFoundError:
            pass
        self._journalled = 0


def read_manifest(folder) -> dict:
    """Read a run folder's manifest as one document, the journal's units replayed over the snapshot.

    Parameters
    ----------
    folder : str or os.PathLike
        The output folder.

    Returns
    -------
    dict
        ``settings_hash``, ``analysis`` and ``units`` (and the snapshot's other keys).

    Raises
    ------
    ManifestMismatch
        The file is not a chirpsift run manifest.
    """
    folder = Path(os.fspath(folder))
    path = folder / MANIFEST_NAME
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
        doc["settings_hash"], doc["analysis"]
        units = dict(doc["units"])
    except (ValueError, KeyError, TypeError, UnicodeDecodeError):
        raise ManifestMismatch(f"{path} is not a chirpsift run manifest; use an empty output folder") from None
    journal = folder / JOURNAL_NAME
    if journal.exists():
        with open(journal, encoding="utf-8", errors="replace") as fh:
            for line in fh:
                try:
                    row = json.loads(line)
                    units[row["key"]] = row["entry"]
                except (ValueError, KeyError, TypeError):
                    break  # a torn last line: that unit is redone
    doc["units"] = units
    return doc


def read_units(folder) -> dict:
    """Units recorded in a run folder's manifest so far (the journal replayed), for watching a run.

    Parameters
    ----------
    folder : str or os.PathLike
        The output folder.

    Returns
    -------
    dict
        Unit key to its entry; empty when the folder has no manifest yet.
    """
    folder = Path(os.fspath(folder))
    if not (folder / MANIFEST_NAME).exists():
        return {}
    return read_manifest(folder)["units"]
