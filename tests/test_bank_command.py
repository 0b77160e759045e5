"""``chirpsift bank``: the command line of bank placement and coverage.

The physics of placement is checked in the bank tests; here: what the command writes,
that it equals the API's result, and that bad input is one line and exit status 2.
"""

import contextlib
import io
import json

import numpy as np
import pytest

from chirpsift import Bank, place_bank
from chirpsift.cli import main

REGION = ["--m1", "1.38", "1.42", "--m2", "1.38", "1.42", "--psd", "gen2-zero-detuned", "--f-low", "40",
          "--sample-rate", "2048"]


def _run(*argv):
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        rc = main(["bank", *argv])
    return rc, out.getvalue(), err.getvalue()


def test_places_the_same_bank_as_the_api_and_writes_coverage(tmp_path):
    path = tmp_path / "bns.parquet"
    rc, out, err = _run(str(path), *REGION, "--coverage", "300", "--no-progress")
    assert rc == 0, err
    bank = Bank.load(path)
    api = place_bank(m1=(1.38, 1.42), m2=(1.38, 1.42), psd="gen2-zero-detuned", f_low=40.0, sample_rate=2048.0)
    np.testing.assert_array_equal(bank.m1, api.m1)  # consistency: the command is the API
    np.testing.assert_array_equal(bank.m2, api.m2)
    assert bank.metadata["region"]["m1"] == [1.38, 1.42] and bank.metadata["method"] == "lattice"
    summary = json.loads((tmp_path / "bns-coverage.json").read_text())
    cov = summary["coverage"]
    assert cov["points"] == 300 and 0.0 <= cov["fraction_covered"] <= 1.0
    assert cov["minimum"] <= cov["percentile_0.1"] <= cov["percentile_1"] <= cov["median"] <= 1.0
    png = (tmp_path / "bns-coverage.png").read_bytes()
    assert png[:8] == b"\x89PNG\r\n\x1a\n"  # the PNG signature (ISO/IEC 15948)
    assert f"Placed {len(bank)} templates" in out and "reach 0.97" in out


def test_config_table_gives_the_region_and_flags_win(tmp_path):
    cfg = tmp_path / "bank.toml"
    cfg.write_text('[bank]\nm1 = [1.38, 1.42]\nm2 = [1.38, 1.42]\npsd = "gen2-zero-detuned"\nf-low = 40.0\n'
                   'sample-rate = 2048.0\nseed = 3\n')
    rc, _, err = _run(str(tmp_path / "a.npz"), "--config", str(cfg), "--seed", "4", "--no-progress")
    assert rc == 0, err
    assert Bank.load(tmp_path / "a.npz").metadata["seed"] == 4


@pytest.mark.parametrize("argv, message", [
    (["x.txt", *REGION], "must end in .parquet or .npz"),
    (["x.npz", "--m1", "2", "1", *REGION[3:]], "--m1 is inverted"),
    (["x.npz", *REGION[:6], "--psd", "gen2-zero", *REGION[8:]], "--psd 'gen2-zero' is not a design curve"),
    (["x.npz", *REGION[:8], "--f-low", "3000", "--sample-rate", "8192"], "at or above the ISCO frequency"),
    (["x.npz", *REGION, "--minimal-match", "1.2"], "--minimal-match must lie in (0, 1)"),
    (["x.npz", *REGION, "--chi1", "0", "1.5"], "--chi1 must lie inside (-1, 1)"),
    (["x.npz", *REGION[:8]], "missing --f-low"),
    (["x.npz", *REGION, "--max-templates", "3"], "more than --max-templates=3"),
])
def test_bad_input_is_one_line_and_exit_2(tmp_path, argv, message):
    rc, out, err = _run(str(tmp_path / argv[0]), *argv[1:], "--no-progress")
    assert rc == 2
    assert message in err and len(err.strip().splitlines()) == 1, err
    assert not (tmp_path / argv[0]).exists()


def test_unknown_config_key_names_the_nearest(tmp_path):
    cfg = tmp_path / "bank.toml"
    cfg.write_text('[bank]\nm1 = [1, 2]\nm2 = [1, 2]\npsd = "gen2-zero-detuned"\nf-low = 30\nminimal-mach = 0.9\n')
    rc, _, err = _run(str(tmp_path / "a.npz"), "--config", str(cfg))
    assert rc == 2 and "unknown key 'minimal-mach'; did you mean 'minimal-match'?" in err
