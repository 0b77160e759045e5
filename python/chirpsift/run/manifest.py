"""The run manifest: which units of a run are complete, with the bytes they published.

``manifest.json`` in the output folder is written by the driver alone, atomically, after
each unit completes. It holds the analysis's settings hash (a run folder belongs to one
analysis) and, per unit key, the files the unit published with their size and SHA-256,
and the fingerprint of the unit's inputs. A unit counts as complete only when its entry
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

__all__ = ["Manifest", "ManifestMismatch", "file_digest", "fingerprint", "MANIFEST_NAME"]

#: File name of the manifest in the output folder.
MANIFEST_NAME = "manifest.json"
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
        try:
            doc = json.loads(path.read_text(encoding="utf-8"))
            old_hash, old_analysis, units = doc["settings_hash"], doc["analysis"], doc["units"]
        except (ValueError, KeyError, TypeError, UnicodeDecodeError):
            raise ManifestMismatch(f"{path} is not a chirpsift run manifest; use an empty output folder") from None
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
        self.write()

    def write(self) -> None:
        """Write the manifest atomically (units in key order, so the bytes depend on content only)."""
        write_json_atomic(self.path, {
            "format": "chirpsift-run-manifest",
            "version": MANIFEST_VERSION,
            "settings_hash": self.settings_hash,
            "analysis": self.analysis,
            "units": {k: self.units[k] for k in sorted(self.units)},
        })
