"""The fused matched-filter kernel over one data segment (numpy API over ``fused``).

Templates are generated on the fly inside the kernel; only clustered, refined
peaks come back, so memory does not grow with the bank size. A bank is checked and
built once (:func:`prepare_bank`) and reused for every segment.
"""

from __future__ import annotations

import numpy as np

from . import _core
from ._validate import complex_array, integer, positive_scalar, psd_array, real_array
from ._template_params import phase_order as _order
from ._template_params import template_arrays
from .spectrum import chain_arguments

__all__ = ["filter_segment", "prepare_bank", "PreparedBank", "prepare_segments", "PreparedSegment", "PEAK_COLUMNS"]

#: Columns returned by :func:`filter_segment`, one entry per peak. The names shared
#: with the trigger table (``template``, ``snr``, ``phase``, ``sigma``, ``chi2``,
#: ``chi2_dof``) mean the same there.
PEAK_COLUMNS = ("template", "index", "position", "snr", "phase", "sigma", "chi2", "chi2_dof")


class PreparedBank:
    """TaylorF2 templates checked and built once for :func:`filter_segment`.

    Make one with :func:`prepare_bank`. ``len(bank)`` is the number of templates;
    ``f_low`` (Hz), ``f_high`` (Hz, per template) and ``durations`` (seconds from
    ``f_low`` to coalescence per template, non-spinning 3.5PN TaylorT2) describe it.
    """

    __slots__ = ("_core",)

    def __init__(self, core_bank):
        self._core = core_bank

    def __len__(self):
        return len(self._core)

    @property
    def f_low(self) -> float:
        """Lower frequency cutoff of every template (Hz)."""
        return self._core.f_low

    @property
    def f_high(self) -> np.ndarray:
        """Upper frequency (Hz, exclusive) of each template."""
        return self._core.f_high

    @property
    def durations(self) -> np.ndarray:
        """Seconds from ``f_low`` to coalescence of each template."""
        return self._core.durations

    def __repr__(self):
        return f"PreparedBank({len(self)} templates, f_low={self.f_low} Hz)"


def prepare_bank(m1, m2, chi1=0.0, chi2=0.0, *, f_low, f_high=None, phase_order=7):
    """Check and build a bank of TaylorF2 templates once, for many segments.

    Parameters
    ----------
    m1, m2, chi1, chi2 : float or array_like
        Template parameters (solar masses, aligned spins ``|chi| < 1``), broadcast to ``K``.
    f_low : float
        Lower frequency cutoff (Hz).
    f_high : float or array_like, optional
        Upper cutoffs (Hz, exclusive); default each template's ISCO frequency.
    phase_order : int, optional
        PN order of the phase (twice the PN order, 7 = 3.5PN).

    Returns
    -------
    PreparedBank

    Examples
    --------
    >>> import chirpsift
    >>> bank = chirpsift.prepare_bank([1.4, 1.6], 1.3, f_low=20.0)
    >>> len(bank), bank.f_low
    (2, 20.0)
    """
    fl = positive_scalar("f_low", f_low)
    m1v, m2v, c1v, c2v, fh = template_arrays(m1, m2, chi1, chi2, f_low=fl, f_high=f_high)
    return PreparedBank(_core.PreparedBank(m1v, m2v, c1v, c2v, fh, fl, _order(phase_order)))


class PreparedSegment:
    """One segment made ready for every template.

    Holds ``4 df d~ / S`` and ``1/S`` in rescaled float32 and the bandwidth moments.
    Make them with :func:`prepare_segments`; pass one to :func:`filter_segment` as
    ``data_fd``. ``n`` is the segment's sample count and ``df`` its bin spacing (Hz).
    """

    __slots__ = ("_core",)

    def __init__(self, core_segment):
        self._core = core_segment

    @property
    def n(self) -> int:
        """Samples of the segment."""
        return self._core.n

    @property
    def df(self) -> float:
        """Bin spacing (Hz)."""
        return self._core.df

    def __repr__(self):
        return f"PreparedSegment({self.n} samples, df={self.df} Hz)"


def prepare_segments(strain, sample_rate, starts, segment_samples, psd=None, *, psd_strain=None, psd_starts=None,
                     psd_samples=None, welch_duration=4.0, f_low=None):
    """Transform and prepare many segments of strain in one call, in parallel.

    Parameters
    ----------
    strain : array_like, shape (n,)
        Strain (dimensionless), finite.
    sample_rate : float
        Hz.
    starts : array_like of int, shape (segments,)
        First sample of each segment.
    segment_samples : int
        Samples ``N`` per segment (even).
    psd : array_like, shape (N // 2 + 1,) or (segments, N // 2 + 1), optional
        One-sided PSD (1/Hz) of each segment on its rfft grid (one row serves all),
        ``inf`` for excluded bins, e.g. from :func:`chirpsift.segment_psds`. None:
        estimated here by the chain of :func:`chirpsift.segment_psds` (Welch median,
        resampling, inverse spectrum truncation) from the blocks
        ``psd_strain[b : b + psd_samples]``, ``b`` in ``psd_starts``, with
        ``welch_duration`` and ``f_low``.
    psd_strain : array_like, shape (m,), optional
        Strain (finite) the PSD blocks are cut from; default ``strain``.
    psd_starts : array_like of int, shape (segments,), optional
        First sample of each segment's PSD block; default ``starts``.
    psd_samples : int, optional
        Samples per PSD block; default ``segment_samples``.
    welch_duration : float, optional
        Welch segment length and kept impulse response of the inverse PSD (s).
    f_low : float, optional
        Bins below this frequency (Hz) are excluded from an estimated PSD (required
        when ``psd`` is None).

    Returns
    -------
    list of PreparedSegment
        Segment ``i`` holds ``d~ = rfft(strain[s_i : s_i + N]) / sample_rate`` (a real
        FFT in the core) weighted by its PSD.

    Notes
    -----
    With ``psd`` None each segment's PSD chain and its data transform run side by
    side on the thread pool, in one call; the result equals, bit for bit, passing
    ``psd=segment_psds(psd_strain, sample_rate, psd_starts, psd_samples, N // 2 + 1,
    welch_duration=welch_duration, f_low=f_low)``.

    Examples
    --------
    >>> import numpy as np, chirpsift
    >>> x = np.random.default_rng(1).normal(size=4096) * 1e-21
    >>> psd = chirpsift.design_psd(np.arange(1025) * 0.5)
    >>> [s.n for s in chirpsift.prepare_segments(x, 1024.0, [0, 2048], 2048, psd)]
    [2048, 2048]
    >>> [s.n for s in chirpsift.prepare_segments(x, 1024.0, [0, 2048], 2048, welch_duration=0.5, f_low=20.0)]
    [2048, 2048]
    """
    x = real_array("strain", strain, ndim=1)
    fs = positive_scalar("sample_rate", sample_rate)
    s = real_array("starts", starts, ndim=1, dtype=None, allow_empty=True)
    if s.dtype.kind not in "iu":
        raise TypeError(f"starts must hold integers, got dtype {s.dtype}")
    n = integer("segment_samples", segment_samples, minimum=4)
    if n % 2:
        raise ValueError(f"segment_samples must be even, got {n}")
    if s.size and (s.min() < 0 or s.max() + n > x.shape[0]):
        raise ValueError(f"starts must keep every segment of {n} samples inside the {x.shape[0]} samples of strain, "
                         f"got starts from {s.min()} to {s.max()}")
    starts_u64 = np.ascontiguousarray(s, dtype=np.uint64)
    if psd is None:
        if f_low is None:
            raise ValueError("f_low must be given when psd is None (the PSD is then estimated)")
        blocks = x if psd_strain is None else real_array("psd_strain", psd_strain, ndim=1)
        b_starts = s if psd_starts is None else psd_starts
        if np.shape(b_starts) != s.shape:
            raise ValueError(f"psd_starts must hold one start per segment ({s.size}), got shape {np.shape(b_starts)}")
        chain = chain_arguments(blocks.shape[0], fs, b_starts, n if psd_samples is None else psd_samples, n // 2 + 1,
                                welch_duration, f_low, names=("psd_strain", "psd_starts", "psd_samples"))
        segments = _core.prepare_segments_estimated(x, starts_u64, n, blocks, chain.starts, chain.block_samples, fs,
                                                    chain.step, chain.window, chain.max_len, chain.f_low)
        return [PreparedSegment(c) for c in segments]
    if psd_strain is not None or psd_starts is not None or psd_samples is not None:
        raise ValueError("psd_strain, psd_starts and psd_samples describe an estimate: give them only with psd=None")
    p = real_array("psd", psd, ndim=(1, 2), finite=False)
    if not (p > 0).all():  # one pass for the usual case; psd_array names the fault
        psd_array("psd", p, ndim=(1, 2))
    p = np.atleast_2d(p)
    if p.shape[1] != n // 2 + 1 or p.shape[0] not in (1, s.size):
        raise ValueError(f"psd must have shape ({n // 2 + 1},) or ({s.size}, {n // 2 + 1}), got {np.shape(psd)}")
    segments = _core.prepare_segments(x, starts_u64, n, np.ascontiguousarray(p), fs)
    return [PreparedSegment(c) for c in segments]


def _valid_range(valid, n):
    """``(start, stop)`` integers with ``1 <= start < stop <= n - 1``."""
    if valid is None:
        return 1, n - 1
    try:
        ndim = np.ndim(valid)
    except ValueError:  # ragged nesting
        ndim = -1
    if isinstance(valid, (str, bytes, dict)) or ndim != 1 or len(valid) != 2:
        raise TypeError(f"valid must be a pair of sample indices (start, stop), got {valid!r}")
    out = []
    for v in valid:
        if isinstance(v, (bool, np.bool_)) or not isinstance(v, (int, np.integer)):
            raise TypeError(f"valid must hold two integers, got {valid!r}")
        out.append(int(v))
    start, stop = out
    if not (1 <= start < stop <= n - 1):
        raise ValueError(f"valid must satisfy 1 <= start < stop <= {n - 1}, got ({start}, {stop})")
    return start, stop


def filter_segment(
    data_fd,
    psd=None,
    df=None,
    m1=None,
    m2=None,
    chi1=0.0,
    chi2=0.0,
    *,
    f_low=None,
    f_high=None,
    bank=None,
    min_snr=5.5,
    cluster_samples=0,
    chi2_bands=16,
    valid=None,
    phase_order=7,
):
    """Filter one segment with TaylorF2 templates generated on the fly.

    Parameters
    ----------
    data_fd : array_like, complex, shape (n_freq,), or PreparedSegment
        Segment in the frequency domain, ``d~ = rfft(d) / sample_rate``; or a segment
        from :func:`prepare_segments` (then ``psd`` and ``df`` are None).
    psd : array_like, shape (n_freq,)
        One-sided PSD (1/Hz) on the same grid, ``inf`` for excluded bins (usually the
        output of :func:`chirpsift.truncate_inverse_psd`).
    df : float
        Frequency spacing (Hz); the segment has ``N = 2 (n_freq - 1)`` samples.
    m1, m2, chi1, chi2 : array_like, optional
        Template parameters (solar masses, aligned spins), broadcast to ``K``; or
        give ``bank`` instead.
    f_low : float
        Lower frequency cutoff (Hz); taken from ``bank`` when one is given.
    f_high : float or array_like, optional
        Upper cutoffs (Hz, exclusive); default each template's ISCO frequency.
    bank : PreparedBank, optional
        Templates from :func:`prepare_bank`, checked and built once; then ``m1``,
        ``m2``, ``chi1``, ``chi2``, ``f_high`` and ``phase_order`` are not given.
    min_snr : float, optional
        Samples with ``|z|`` at or above this are peak candidates.
    cluster_samples : int, optional
        A peak survives only if no louder peak of the same template lies within this
        many samples (ties go to the earlier one).
    chi2_bands : int, optional
        Number ``p`` of frequency bands of equal expected SNR^2 for Allen's chi-squared.
    valid : (int, int), optional
        Analysable samples ``[start, stop)``; default all but the first and last sample.
    phase_order : int, optional
        PN order of the phase (twice the PN order, 7 = 3.5PN).

    Returns
    -------
    dict of ndarray
        Columns :data:`PEAK_COLUMNS`, one entry per surviving peak, ordered by
        template and then time: ``template`` (index), ``index`` (peak sample),
        ``position`` (refined peak, fractional samples from the segment start),
        ``snr`` and ``phase`` (``|z|`` and ``arg z`` evaluated exactly at
        ``position``), ``sigma`` (norm of the template at 1 Mpc), ``chi2`` and
        ``chi2_dof`` (``2 p - 2``).

    See Also
    --------
    chirpsift.reference.filter_segment : the pure-numpy twin (full SNR series).

    Notes
    -----
    Peaks are local maxima of ``|z|`` (above the previous sample, at least the next).
    The refined position is the vertex of the parabola through ``|z|`` at the peak
    sample and its neighbours; SNR, phase and the chi-squared band sums are then
    evaluated directly at that fractional time from the frequency-domain product.
    Band ``l`` of the chi-squared holds bin ``k`` when
    ``floor(p C_k / sigma^2) = l`` with ``C_k`` the template norm accumulated below
    bin ``k``, and ``chi^2 = p sum_l |z_l - z/p|^2``.

    References
    ----------
    .. [1] B. Allen, "A chi^2 time-frequency discriminator for gravitational wave
       detection", Phys. Rev. D 71, 062001 (2005), gr-qc/0405045.
    .. [2] B. Allen et al., Phys. Rev. D 85, 122006 (2012), arXiv:gr-qc/0509116.
    """
    if isinstance(data_fd, PreparedSegment):
        if psd is not None or df is not None:
            raise TypeError("a PreparedSegment carries its PSD and df: pass psd=None, df=None")
        segment, p = data_fd, None
        n, dfv = segment.n, segment.df
    else:
        d = complex_array("data_fd", data_fd, ndim=1, dtype=np.complex128)
        if d.shape[0] < 3:
            raise ValueError(f"data_fd must have at least 3 frequency bins, got {d.shape[0]}")
        p = psd_array("psd", psd, ndim=1)
        if p.shape != d.shape:
            raise ValueError(f"psd must have {d.shape[0]} bins to match data_fd, got {p.shape[0]}")
        dfv = positive_scalar("df", df)
        n = 2 * (d.shape[0] - 1)
        segment = None
    n_freq = n // 2 + 1
    nyquist = (n_freq - 1) * dfv
    if bank is None:
        if m1 is None or m2 is None:
            raise TypeError("filter_segment needs the templates: m1 and m2, or bank=prepare_bank(...)")
        fl = positive_scalar("f_low", f_low)
        if fl >= nyquist:
            raise ValueError(f"f_low={fl} Hz must be below the Nyquist frequency {nyquist} Hz")
        bank = prepare_bank(m1, m2, chi1, chi2, f_low=fl, f_high=f_high, phase_order=phase_order)
    else:
        if not isinstance(bank, PreparedBank):
            raise TypeError(f"bank must come from chirpsift.prepare_bank, got {type(bank).__name__}")
        given = [name for name, v in (("m1", m1), ("m2", m2), ("f_high", f_high)) if v is not None]
        given += [name for name, v, default in (("chi1", chi1, 0.0), ("chi2", chi2, 0.0), ("phase_order", phase_order, 7))
                  if not (isinstance(v, (int, float)) and v == default)]
        if given:
            raise TypeError(f"give either bank or template parameters, not both (got bank and {', '.join(given)})")
        fl = bank.f_low
        if f_low is not None and positive_scalar("f_low", f_low) != fl:
            raise ValueError(f"f_low={f_low} Hz differs from the bank's f_low={fl} Hz")
        if fl >= nyquist:
            raise ValueError(f"the bank's f_low={fl} Hz must be below the Nyquist frequency {nyquist} Hz")
    thr = positive_scalar("min_snr", min_snr)
    # A window longer than the segment keeps one peak per segment, as a window of n does.
    cl = min(integer("cluster_samples", cluster_samples, minimum=0), n)
    k_low, _ = _core.band(fl, None, dfv, n_freq)
    bins = integer("chi2_bands", chi2_bands, minimum=2, maximum=max(2, n_freq - k_low))
    start, stop = _valid_range(valid, n)
    if segment is None:
        if not np.isfinite(p[k_low:]).any():
            raise ValueError(f"psd is inf at every frequency above f_low={fl} Hz")
        segment = PreparedSegment(_core.prepare_segment(d, p, dfv))
    return _core.filter_segment(segment._core, bank._core, thr, cl, bins, start, stop)
