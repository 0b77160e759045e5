"""The run manifest's journal: each unit appended, folded into the snapshot, torn lines ignored.

Expected values are what the module promises (consistency tests of its own rules); the
outside fact they rest on is POSIX append and rename semantics (common practice).
"""

import json

import pytest

from chirpsift.run import manifest as mf
from chirpsift.run.manifest import JOURNAL_NAME, MANIFEST_NAME, Manifest, read_units


def _manifest(tmp_path):
    m = Manifest.open(tmp_path, "hash", {"a": 1})
    m.write()
    return m


def _publish(tmp_path, m, key):
    (tmp_path / f"{key}.txt").write_text(key)
    m.record(key, "stage", [f"{key}.txt"], "fp-" + key, rows=1)


def test_units_are_journalled_then_folded(tmp_path):
    m = _manifest(tmp_path)
    for k in ("u1", "u2"):
        _publish(tmp_path, m, k)
    snapshot = json.loads((tmp_path / MANIFEST_NAME).read_text())
    assert snapshot["units"] == {}  # not rewritten per unit
    assert len((tmp_path / JOURNAL_NAME).read_text().splitlines()) == 2
    assert set(read_units(tmp_path)) == {"u1", "u2"}
    reopened = Manifest.open(tmp_path, "hash", {"a": 1})
    assert reopened.complete("u2", "fp-u2") and not reopened.complete("u2", "other")
    m.fold()
    assert not (tmp_path / JOURNAL_NAME).exists()
    assert set(json.loads((tmp_path / MANIFEST_NAME).read_text())["units"]) == {"u1", "u2"}


def test_a_torn_last_line_is_a_unit_to_redo(tmp_path):
    m = _manifest(tmp_path)
    _publish(tmp_path, m, "u1")
    _publish(tmp_path, m, "u2")
    journal = tmp_path / JOURNAL_NAME
    text = journal.read_text()
    journal.write_text(text[: len(text) - 20])  # the driver killed while appending u2
    assert set(read_units(tmp_path)) == {"u1"}
    assert not Manifest.open(tmp_path, "hash", {"a": 1}).complete("u2", "fp-u2")


def test_the_snapshot_is_rewritten_every_fold_every_units(tmp_path, monkeypatch):
    monkeypatch.setattr(mf, "FOLD_EVERY", 3)
    m = _manifest(tmp_path)
    for k in ("u1", "u2", "u3", "u4"):
        _publish(tmp_path, m, k)
    assert set(json.loads((tmp_path / MANIFEST_NAME).read_text())["units"]) == {"u1", "u2", "u3"}
    assert [json.loads(x)["key"] for x in (tmp_path / JOURNAL_NAME).read_text().splitlines()] == ["u4"]


def test_folding_gives_the_same_bytes_however_the_units_arrived(tmp_path):
    a, b = tmp_path / "a", tmp_path / "b"
    for folder, order in ((a, ("u1", "u2", "u3")), (b, ("u3", "u1", "u2"))):
        folder.mkdir()
        m = _manifest(folder)
        for k in order:
            _publish(folder, m, k)
        m.fold()
    assert (a / MANIFEST_NAME).read_bytes() == (b / MANIFEST_NAME).read_bytes()


def test_a_foreign_manifest_is_refused(tmp_path):
    (tmp_path / MANIFEST_NAME).write_text("{}")
    with pytest.raises(mf.ManifestMismatch, match="not a chirpsift run manifest"):
        read_units(tmp_path)


def test_a_manifest_resumed_from_its_journal_folds_to_the_same_bytes(tmp_path):
    a, b = tmp_path / "a", tmp_path / "b"
    for folder in (a, b):
        folder.mkdir()
        m = _manifest(folder)
        for k in ("u1", "u2"):
            _publish(folder, m, k)
        if folder == b:  # the driver dies here; the next run opens the journal and goes on
            m = Manifest.open(folder, "hash", {"a": 1})
        _publish(folder, m, "u3")
        m.fold()
    assert (a / MANIFEST_NAME).read_bytes() == (b / MANIFEST_NAME).read_bytes()
