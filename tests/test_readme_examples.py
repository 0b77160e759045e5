"""The README's numpy example runs and says what is true.

Its claim, ``|z|^2`` averages 2 in Gaussian noise, is a fact of matched filtering
(common practice; e.g. Allen et al. 2012, arXiv:gr-qc/0509116, section II): for noise of
the PSD the filter assumes, the real and imaginary parts of the normalised complex SNR
each have unit variance.
"""

import contextlib
import io
import re
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]


def _python_blocks(section: str) -> list[str]:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    body = text.split(f"## {section}\n", 1)[1].split("\n## ", 1)[0]
    return re.findall(r"```python\n(.*?)```", body, flags=re.DOTALL)


def test_numpy_example_is_true():
    (code,) = _python_blocks("The numpy API")
    ns: dict = {}
    with contextlib.redirect_stdout(io.StringIO()):
        exec(compile(code, "README.md (The numpy API)", "exec"), ns)  # noqa: S102 - our own README
    # both templates fit in the buffer, as the comment says
    durations = ns["chirpsift"].chirp_duration(ns["m1"], ns["m2"], ns["f_low"])
    assert np.all(durations < ns["duration"])
    # mean |z|^2 = 2. The sample mean over the circular series equals, by Parseval, a
    # weighted mean of per-bin |d~|^2 / E|d~|^2 (each exponential, variance 1) with
    # weights w = |h~|^2 / S, so its relative standard deviation is 1 / sqrt(n_eff),
    # n_eff = (sum w)^2 / sum w^2; allow five of them.
    h, psd, f_low, duration = ns["h"], ns["psd"], ns["f_low"], ns["duration"]
    freqs = np.arange(psd.size) / duration
    band = (freqs >= f_low) & np.isfinite(psd)
    mean = np.mean(np.abs(ns["z"]) ** 2, axis=1)
    for row, m in zip(h, mean):
        w = np.abs(row[band]) ** 2 / psd[band]
        n_eff = w.sum() ** 2 / (w**2).sum()
        assert abs(m - 2.0) < 5 * 2.0 / np.sqrt(n_eff), (m, n_eff)
