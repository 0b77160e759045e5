"""Thread count: results are bitwise identical for any number of worker threads, and
the CHIRPSIFT_THREADS environment variable sets the default (common practice for
deterministic parallel reductions: fixed work split and reduction order)."""

import os
import subprocess
import sys

import numpy as np
import pytest

import chirpsift as cs

FS = 1024.0
N = 2**15


@pytest.fixture
def restore_threads():
    before = cs.get_threads()
    yield
    cs.set_threads(before)


def _kernels():
    rng = np.random.default_rng(5)
    x = rng.normal(size=(3, N)) * 1e-21
    freqs = np.arange(N // 2 + 1) * FS / N
    psd = cs.design_psd(freqs)
    df = FS / N
    h = cs.taylorf2(np.linspace(5, 20, 12), 4.0, f_low=20.0, df=df, n_freq=freqs.size)
    d = np.fft.rfft(x[0]) / FS
    return {
        "welch": lambda: cs.welch(x, FS, 2.0)[1],
        "whiten": lambda: cs.whiten(x, psd, FS, f_low=20.0),
        "truncate_inverse_psd": lambda: cs.truncate_inverse_psd(np.stack([psd] * 3), FS, 2.0, 20.0),
        "taylorf2": lambda: cs.taylorf2(np.linspace(5, 20, 12), 4.0, 0.3, -0.2, f_low=20.0, df=df, n_freq=freqs.size),
        "sigma": lambda: cs.sigma(h, psd, df, 20.0),
        "snr_series": lambda: cs.snr_series(d, h, psd, df, 20.0),
        "correlate": lambda: cs.correlate(x[0], x[1:, :500], mode="full"),
        "filter_segment": lambda: _columns(cs.filter_segment(d, psd, df, np.linspace(5, 20, 12), 4.0, f_low=20.0,
                                                             min_snr=3.0, valid=(2048, N - 2048))),
        "search": lambda: cs.search(x[0], FS, {"m1": np.linspace(10, 20, 6), "m2": np.full(6, 8.0)}, f_low=30.0,
                                    segment_duration=16.0, welch_duration=1.0, min_snr=4.0),
    }


def _columns(found):
    """All peak columns as one array, so a bitwise comparison covers every field."""
    return np.concatenate([np.asarray(found[k], dtype=np.float64) for k in cs.PEAK_COLUMNS])


@pytest.mark.parametrize("name", sorted(_kernels()))
def test_every_kernel_is_bitwise_identical_across_thread_counts(name, restore_threads):
    fn = _kernels()[name]
    cs.set_threads(1)
    one = fn()
    cs.set_threads(2)
    two = fn()
    cs.set_threads(3)  # more threads than cores: still the same split
    three = fn()
    assert one.size > 0  # something to compare
    assert one.tobytes() == two.tobytes() == three.tobytes()


def test_environment_variable_sets_default_thread_count():
    env = dict(os.environ, CHIRPSIFT_THREADS="3")
    out = subprocess.run([sys.executable, "-c", "import chirpsift; print(chirpsift.get_threads())"],
                         env=env, capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "3"


@pytest.mark.parametrize("bad, exc", [(0, ValueError), (-1, ValueError), (2.5, TypeError), ("2", TypeError), (10**6, ValueError)])
def test_set_threads_rejects_bad_counts(bad, exc, restore_threads):
    with pytest.raises(exc, match="n"):
        cs.set_threads(bad)
