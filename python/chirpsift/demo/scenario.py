"""The demo's scenario: three invented sites, synthetic noise, one hidden binary, a glitch, a veto and a gap.

:func:`make_scenario` settles every number of the scenario from a few choices (minutes
of data, noise seed, slides, injections) and :func:`write_scenario` writes it into a
folder as a user's own analysis would look: strain files per site, a sites file, a veto
file, a template bank and an analysis file for ``chirpsift run``, plus
``scenario.json``, the truth the demo compares the run's results with (written last, so
its presence means the scenario is complete).

Every constant is set here, at the top, with the reason for its value. Sites, source
and times are invented; the noise is Gaussian and stationary, drawn from analytic
design curves, so nothing here says anything about a real instrument.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field
from pathlib import Path

import numpy as np

from ..inject import INJECTION_DTYPE, arrival_times, injection_snr, project
from ..inject.population import SPACING_MARGIN, longest_signal
from ..io.atomic import atomic_path, write_json_atomic
from ..network import EXAMPLE_SITES, load_sites
from ..network.coincidence import DEFAULT_ALLOWANCE
from ..run import write_analysis
from ..segments import padding
from ..spectrum import design_psd
from ..synthetic import colored_gaussian_noise
from ..waveform import chirp_duration

__all__ = [
    "Scenario", "make_scenario", "write_scenario", "bank_table", "analysis_mapping",
    "glitch_waveform", "estimated_common_time", "read_scenario",
    "DEFAULT_FOLDER", "SITES", "CURVES", "SAMPLE_RATE", "START", "MINUTES", "MIN_MINUTES", "FILES_PER_SITE",
    "MISSING_FILE", "NOISE_SEED", "NOISE_F_LOW", "F_LOW", "REGION", "BANK_MINIMAL_MATCH", "HIDDEN", "HIDDEN_AT",
    "HIDDEN_NETWORK_SNR", "GLITCH", "VETO", "WELCH_DURATION", "MIN_SNR", "PEAK_WINDOW", "GATE_THRESHOLD", "SLIDES",
    "SLIDE_STEP", "INJECTIONS", "INJECTION_DISTANCE", "INJECTION_SEED", "REPORT_TOP", "SCENARIO_FILE",
    "ANALYSIS_FILE", "RESULTS",
]

# ---------------------------------------------------------------------------
# the scenario's constants, each with the reason for its value
# ---------------------------------------------------------------------------
#: Folder ``chirpsift demo`` writes into when given no ``--output``.
DEFAULT_FOLDER = "chirpsift-demo"
#: The scenario's truth file, written last (its presence means the scenario is complete).
SCENARIO_FILE = "scenario.json"
#: The analysis file the demo hands to ``chirpsift run``.
ANALYSIS_FILE = "analysis.toml"
#: The run's output folder, inside the demo folder.
RESULTS = "results"
#: The three invented sites of :data:`chirpsift.network.EXAMPLE_SITES`, in analysis order
#: (the first is never slid). Three sites, up to 9,000 km apart, make the delays and
#: antenna responses matter.
SITES = ("Kestrel", "Heron", "Plover")
#: Design curve (:data:`chirpsift.DESIGN_CURVES`) each site's noise is drawn from: two alike
#: and one of another shape, so the report's spectra and per-site SNRs differ.
CURVES = {"Kestrel": "gen2-zero-detuned", "Heron": "gen2-zero-detuned", "Plover": "gen2-early"}
#: Hz. The binary's ISCO frequency (1.6 kHz) lies above the Nyquist frequency, which costs
#: under 1% of its SNR in these curves, and halves the work of 4096 Hz.
SAMPLE_RATE = 2048.0
#: GPS s of each site's first sample: a round time at which no real detector observed.
START = 1_300_000_000.0
#: Minutes of data per site: at least 20 (the scenario's brief), and enough common time
#: after the gap, the veto and the edge pads for 1,000 slides of :data:`SLIDE_STEP`.
MINUTES = 25.0
#: Fewest minutes accepted: the hidden binary, the gap, the glitch and the veto each need
#: a file or two to themselves, longer than the 32 s lost at each stretch's start.
MIN_MINUTES = 8.0
#: Strain files per site, all of the same length: several per site, as real data come.
FILES_PER_SITE = 6
#: The file left out (site, index): one in the middle, so Kestrel's data have a gap.
MISSING_FILE = ("Kestrel", 3)
#: Seed of the noise (site ``k`` of :data:`SITES` draws with ``[NOISE_SEED, k]``).
NOISE_SEED = 2027
#: Hz below which the noise has no power: the search starts at :data:`F_LOW`, and the steep
#: low-frequency wall of the curves would otherwise leak through the Welch windows.
NOISE_F_LOW = 30.0
#: Hz where templates and filters start: binaries of 1.35-1.45 Msun last 22-27 s from
#: here, so segments, edge pads and injection spacing stay short.
F_LOW = 40.0
#: Component-mass range (Msun) of the bank and the injections: a small neutron-star-like
#: region placed in a few seconds (232 templates at :data:`BANK_MINIMAL_MATCH`).
REGION = (1.35, 1.45)
#: The bank's minimal match: 0.97, common practice (at most ~10% of events lost).
BANK_MINIMAL_MATCH = 0.97
#: The hidden binary (invented): masses (Msun) inside :data:`REGION` but on no template,
#: no spin, a sky position (rad) seen by all three sites, a moderate inclination (rad).
HIDDEN = {"m1": 1.43, "m2": 1.37, "spin1": 0.0, "spin2": 0.0, "ra": 2.1, "dec": 0.35, "inclination": 0.6,
          "polarisation": 0.9, "phase": 1.7}
#: Where it coalesces (geocentric): this fraction of the data from the start plus 0.4137 s
#: (off the sample grid), inside the second file, before the gap, the glitch and the veto.
HIDDEN_AT = (0.29, 0.4137)
#: Network optimal SNR of the hidden binary (quadrature sum over sites); its distance is
#: set to give it. Moderate: clear of the Gaussian background, not absurdly loud.
HIDDEN_NETWORK_SNR = 15.0
#: A loud sine-Gaussian glitch at one site: centre frequency (Hz), quality factor, optimal
#: SNR from :data:`F_LOW` to Nyquist and time (fraction of the data, plus seconds). SNR
#: 300 is about 50 standard deviations of whitened noise at its peak, far above the gate.
GLITCH = {"site": "Heron", "frequency": 150.0, "q": 6.0, "snr": 300.0, "at": (0.8, 0.257)}
#: Vetoed time (site, start as a fraction of the data, duration in s): 30 s a site's
#: operators flagged, near the end so the stretch after it shows how short stretches count.
VETO = ("Plover", 0.9, 30.0)
#: s: Welch segments of the PSD (the search's default).
WELCH_DURATION = 4.0
#: Smallest SNR kept as a trigger (the search's default).
MIN_SNR = 5.0
#: s: half-width of the clustering; short, so slides of :data:`SLIDE_STEP` stay independent.
PEAK_WINDOW = 0.1
#: Gate where whitened data exceed this many standard deviations: 25 minutes of Gaussian
#: noise at 2048 Hz (3 million samples) almost never pass 6, the glitch passes 40.
GATE_THRESHOLD = 10.0
#: Time slides of the background (the scenario's brief: at least 1,000).
SLIDES = 1000
#: s between slides: above the widest coincidence window (Heron-Plover light travel time,
#: 40 ms, plus the 5 ms allowance) plus twice :data:`PEAK_WINDOW`, and small enough that
#: 1,000 slides of two moving sites (2 x 1,000 x 0.5 s) fit in the common time.
SLIDE_STEP = 0.5
#: Simulated binaries of the short injection campaign: one per 38 s slot (longest signal
#: plus margin) in most of the common time.
INJECTIONS = 20
#: Mpc: injection distances, drawn uniform in volume, from loud to beyond every site's
#: horizon (380 Mpc for an optimally oriented 1.4 + 1.4 Msun source at SNR 8 in gen2-zero-detuned).
INJECTION_DISTANCE = (20.0, 500.0)
#: Seed of the injection draw.
INJECTION_SEED = 11
#: Candidates the report and ``chirpsift run`` list.
REPORT_TOP = 10


@dataclass(frozen=True)
class Scenario:
    """Every number of one demo scenario (from :func:`make_scenario`).

    Attributes
    ----------
    minutes : float
        Minutes of data per site.
    seed : int
        Noise seed.
    slides : int
        Time slides.
    injections : int
        Simulated binaries of the campaign.
    files : dict of str to list of (float, float)
        Per site, the ``[start, end)`` (GPS s) of each strain file written (the missing
        one left out).
    gap : (float, float)
        The missing file's interval at :data:`MISSING_FILE`'s site, s.
    veto : (float, float)
        The vetoed interval at :data:`VETO`'s site, s.
    hidden : dict
        The hidden binary: :data:`HIDDEN` plus ``time`` (geocentric, s) and
        ``distance`` (Mpc); filled in by :func:`write_scenario` with per-site
        ``arrival`` times (s) and ``optimal_snr``, and ``network_snr``.
    glitch : dict
        :data:`GLITCH` plus its ``time`` (s) and ``amplitude`` (strain).
    """

    minutes: float
    seed: int
    slides: int
    injections: int
    files: dict
    gap: tuple
    veto: tuple
    hidden: dict = field(default_factory=dict)
    glitch: dict = field(default_factory=dict)

    @property
    def duration(self) -> float:
        """Seconds of data per site (before the gap)."""
        return 60.0 * self.minutes

    def as_dict(self) -> dict:
        """Plain JSON-friendly form (lists for tuples)."""
        doc = asdict(self)
        doc["files"] = {n: [list(iv) for iv in ivs] for n, ivs in self.files.items()}
        doc["gap"], doc["veto"] = list(self.gap), list(self.veto)
        return doc


def make_scenario(minutes: float = MINUTES, *, seed: int = NOISE_SEED, slides: int = SLIDES,
                  injections: int = INJECTIONS) -> Scenario:
    """Settle the layout of a scenario: files, gap, veto, and the times of the binary and the glitch.

    Parameters
    ----------
    minutes : float, optional
        Minutes of data per site, at least :data:`MIN_MINUTES`.
    seed : int, optional
        Noise seed (non-negative).
    slides : int, optional
        Time slides (at least 1).
    injections : int, optional
        Simulated binaries of the campaign (at least 1).

    Returns
    -------
    Scenario
        Without the hidden binary's distance and SNRs or the glitch's amplitude, which
        :func:`write_scenario` computes.

    Raises
    ------
    ValueError
        A value out of range, or more slides or injections than the scenario's common
        time holds (the message names the most that fit).

    Examples
    --------
    >>> from chirpsift.demo import make_scenario
    >>> s = make_scenario(10, slides=200, injections=5)
    >>> s.duration, len(s.files["Kestrel"]), len(s.files["Heron"]), s.gap
    (600.0, 5, 6, (1300000300.0, 1300000400.0))
    """
    for name, value, low in (("minutes", minutes, MIN_MINUTES), ("seed", seed, 0), ("slides", slides, 1),
                             ("injections", injections, 1)):
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value) \
                or value < low or (name != "minutes" and int(value) != value):
            kind = "a number" if name == "minutes" else "an integer"
            raise ValueError(f"{name} must be {kind} >= {low:g}, got {value!r}")
    duration = 60.0 * float(minutes)
    per_file = int(round(duration * SAMPLE_RATE)) // FILES_PER_SITE  # whole samples, so files abut exactly
    edges = [START + i * per_file / SAMPLE_RATE for i in range(FILES_PER_SITE + 1)]
    files = {}
    for name in SITES:
        files[name] = [(a, b) for i, (a, b) in enumerate(zip(edges, edges[1:]))
                       if (name, i) != MISSING_FILE]
    gap = (edges[MISSING_FILE[1]], edges[MISSING_FILE[1] + 1])
    veto_start = START + round(VETO[1] * duration)
    veto = (veto_start, veto_start + VETO[2])
    hidden = dict(HIDDEN, time=START + round(HIDDEN_AT[0] * duration) + HIDDEN_AT[1])
    glitch = dict(GLITCH, time=START + round(GLITCH["at"][0] * duration) + GLITCH["at"][1])
    glitch["at"] = list(glitch["at"])
    scenario = Scenario(minutes=float(minutes), seed=int(seed), slides=int(slides), injections=int(injections),
                        files=files, gap=gap, veto=veto, hidden=hidden, glitch=glitch)
    _check_fits(scenario)
    return scenario


def _analysed(scenario: Scenario, name: str) -> list[tuple[float, float]]:
    """Intervals (s) the search will analyse at a site: its stretches less the edge pads."""
    pad_start, pad_end = padding(chirp_duration(REGION[0], REGION[0], F_LOW), WELCH_DURATION, SAMPLE_RATE)
    first, last = pad_start / SAMPLE_RATE, pad_end / SAMPLE_RATE
    stretches, current = [], None
    for a, b in scenario.files[name]:
        if current is not None and a == current[1]:
            current = (current[0], b)
        else:
            if current is not None:
                stretches.append(current)
            current = (a, b)
    stretches.append(current)
    if name == VETO[0]:
        v0, v1 = scenario.veto
        split = []
        for a, b in stretches:
            split += [iv for iv in ((a, min(b, v0)), (max(a, v1), b)) if iv[1] > iv[0]]
        stretches = split
    return [(a + first, b - last) for a, b in stretches if b - last > a + first]


def estimated_common_time(scenario: Scenario) -> list[tuple[float, float]]:
    """Time (intervals in s) every site will analyse, from the layout and the search's edge pads.

    An estimate made before any search: it leaves out stretches too short to search and
    gated time, so the run's own common time can be a little shorter.

    Parameters
    ----------
    scenario : Scenario

    Returns
    -------
    list of (float, float)
    """
    common = _analysed(scenario, SITES[0])
    for name in SITES[1:]:
        other, out = _analysed(scenario, name), []
        for a, b in common:
            for c, d in other:
                lo, hi = max(a, c), min(b, d)
                if hi > lo:
                    out.append((lo, hi))
        common = out
    return common


def _check_fits(scenario: Scenario) -> None:
    """Refuse slides or injections that the common time cannot hold, before anything is computed."""
    common = estimated_common_time(scenario)
    live = sum(b - a for a, b in common)
    # chirpsift.coincidences: n_slides (n_sites - 1) slide_step <= L - slide_step; keep 5 s spare for
    # stretches the search may find too short
    most = int((live - 5.0 - SLIDE_STEP) // ((len(SITES) - 1) * SLIDE_STEP))
    if scenario.slides > most:
        raise ValueError(f"slides={scenario.slides} do not fit in the {live:.0f} s all sites analyse in "
                         f"{scenario.minutes:g} minutes of data: at most {max(most, 0)} (each of the "
                         f"{len(SITES) - 1} moving sites moves {SLIDE_STEP:g} s per slide); give more minutes")
    spacing = longest_signal(REGION, REGION, F_LOW) + SPACING_MARGIN
    slots = math.ceil((common[-1][1] - common[0][0]) / spacing)
    if scenario.injections > slots:
        raise ValueError(f"injections={scenario.injections} do not fit in {scenario.minutes:g} minutes of data: "
                         f"at most {slots} (one per {spacing:.0f} s, so that no two signals overlap); "
                         "give more minutes")


# ---------------------------------------------------------------------------
# the bank
# ---------------------------------------------------------------------------
def bank_table(folder) -> dict:
    """Return the analysis file's ``[bank]`` table for the demo: a region to place a bank in.

    ``chirpsift run`` places it (:func:`chirpsift.place_bank`, the hexagonal lattice) at
    the start of the run, for the noise curve of the first site.

    Parameters
    ----------
    folder : path
        The demo folder (the analysis file's folder); nothing is written there.

    Returns
    -------
    dict
        The ``[bank]`` table.
    """
    return {"m1": list(REGION), "m2": list(REGION), "psd": CURVES[SITES[0]], "f-low": F_LOW,
            "minimal-match": BANK_MINIMAL_MATCH, "sample-rate": SAMPLE_RATE, "seed": NOISE_SEED}


# ---------------------------------------------------------------------------
# the signals
# ---------------------------------------------------------------------------
def glitch_waveform(t, *, time, frequency, q, amplitude):
    """Evaluate a sine-Gaussian ``A exp(-(2 pi f (t - t0) / Q)^2 / 2) sin(2 pi f (t - t0))``.

    Parameters
    ----------
    t : array_like
        Times (s).
    time : float
        Centre ``t0`` (s).
    frequency : float
        Centre frequency ``f`` (Hz).
    q : float
        Quality factor ``Q``: the envelope's standard deviation is ``Q / (2 pi f)`` s.
    amplitude : float
        Peak envelope ``A`` (strain).

    Returns
    -------
    ndarray of float64
    """
    x = 2.0 * math.pi * frequency * (np.asarray(t, dtype=np.float64) - time)
    return amplitude * np.exp(-0.5 * (x / q) ** 2) * np.sin(x)


def _glitch_amplitude(glitch: dict, curve: str) -> float:
    """Amplitude giving the glitch its optimal SNR over ``[F_LOW, Nyquist)`` in the design curve."""
    n = int(SAMPLE_RATE)  # 1 s around the centre holds the glitch (its envelope lasts about 10 ms)
    t = np.arange(n) / SAMPLE_RATE
    g = glitch_waveform(t, time=0.5, frequency=glitch["frequency"], q=glitch["q"], amplitude=1.0)
    gf = np.fft.rfft(g) / SAMPLE_RATE
    f = np.fft.rfftfreq(n, 1.0 / SAMPLE_RATE)
    band = (f >= F_LOW) & (f < SAMPLE_RATE / 2)
    snr1 = math.sqrt(4.0 * float(np.sum(np.abs(gf[band]) ** 2 / design_psd(f[band], curve))) * (f[1] - f[0]))
    return glitch["snr"] / snr1


def _hidden_row(hidden: dict) -> np.ndarray:
    row = np.zeros(1, dtype=INJECTION_DTYPE)
    for key in ("time", "m1", "m2", "spin1", "spin2", "distance", "ra", "dec", "inclination", "polarisation",
                "phase"):
        row[key] = hidden[key]
    row["distance_density"] = 1.0  # one source, drawn from no population: any positive value
    return row


def _settle_hidden(hidden: dict, sites: dict) -> dict:
    """Distance for :data:`HIDDEN_NETWORK_SNR`, per-site arrival times and optimal SNRs."""
    out = dict(hidden, distance=1.0)
    row = _hidden_row(out)
    snr = {n: float(injection_snr(row, sites[n], CURVES[n], f_low=F_LOW, f_high=SAMPLE_RATE / 2)[0]) for n in SITES}
    out["distance"] = math.sqrt(sum(v * v for v in snr.values())) / HIDDEN_NETWORK_SNR
    out["optimal_snr"] = {n: v / out["distance"] for n, v in snr.items()}
    out["network_snr"] = math.sqrt(sum(v * v for v in out["optimal_snr"].values()))
    out["arrival"] = {n: float(arrival_times(row, sites[n])[0]) for n in SITES}
    return out


# ---------------------------------------------------------------------------
# writing
# ---------------------------------------------------------------------------
def analysis_mapping(scenario: Scenario, bank: dict) -> dict:
    """Describe a scenario's analysis file as the mapping :func:`chirpsift.run.write_analysis` takes.

    Parameters
    ----------
    scenario : Scenario
    bank : dict
        The ``[bank]`` table (:func:`bank_table`).

    Returns
    -------
    dict
    """
    data = {n: {"files": [f"{n}/*.npz"]} for n in SITES}
    data[VETO[0]]["vetoes"] = f"{VETO[0]}-vetoes.txt"
    return {
        "version": 1,
        "output": RESULTS,
        "sites": {"file": "sites.toml"},
        "data": data,
        "bank": bank,
        "search": {"f-low": F_LOW, "welch-duration": WELCH_DURATION, "min-snr": MIN_SNR, "peak-window": PEAK_WINDOW,
                   "gate-threshold": GATE_THRESHOLD},
        "network": {"slides": scenario.slides, "slide-step": SLIDE_STEP, "allowance": DEFAULT_ALLOWANCE},
        "injections": {"count": scenario.injections, "m1": list(REGION), "m2": list(REGION),
                       "distance": list(INJECTION_DISTANCE), "distance-distribution": "volume",
                       "seed": INJECTION_SEED},
        "report": {"top": REPORT_TOP},
    }


def write_scenario(folder, scenario: Scenario, *, progress=None) -> Scenario:
    """Write a scenario's inputs into ``folder`` and return it completed with the injected values.

    Writes ``<site>/<site>-<start>.npz`` strain files (arrays ``strain``, ``sample_rate``,
    ``t0``), ``sites.toml``, the veto file, the bank (:func:`bank_table`), the analysis
    file :data:`ANALYSIS_FILE` and, last, :data:`SCENARIO_FILE` (the truth). Every file
    is written atomically.

    Parameters
    ----------
    folder : path
        An existing folder.
    scenario : Scenario
        From :func:`make_scenario`.
    progress : callable, optional
        Called with a short text as each site is written.

    Returns
    -------
    Scenario
        ``scenario`` with the hidden binary's distance, arrival times and SNRs and the
        glitch's amplitude filled in.
    """
    folder = Path(folder)
    sites = load_sites(EXAMPLE_SITES)
    hidden = _settle_hidden(scenario.hidden, sites)
    glitch = dict(scenario.glitch, amplitude=_glitch_amplitude(scenario.glitch, CURVES[scenario.glitch["site"]]))
    row = _hidden_row(hidden)
    per_file = int(round(scenario.duration * SAMPLE_RATE)) // FILES_PER_SITE
    n = per_file * FILES_PER_SITE
    for k, name in enumerate(SITES):
        if progress is not None:
            progress(f"writing {scenario.minutes:g} minutes of {name}'s strain")
        x = colored_gaussian_noise(n, SAMPLE_RATE, CURVES[name], seed=[scenario.seed, k], f_low=NOISE_F_LOW)
        x += project(row, sites[name], start=START, duration=n / SAMPLE_RATE, sample_rate=SAMPLE_RATE, f_low=F_LOW)
        if name == glitch["site"]:
            i = int(round((glitch["time"] - START) * SAMPLE_RATE))
            j = np.arange(max(i - int(SAMPLE_RATE), 0), min(i + int(SAMPLE_RATE), n))
            x[j] += glitch_waveform(START + j / SAMPLE_RATE, time=glitch["time"], frequency=glitch["frequency"],
                                    q=glitch["q"], amplitude=glitch["amplitude"])
        (folder / name).mkdir(exist_ok=True)
        for a, _ in scenario.files[name]:
            i = int(round((a - START) * SAMPLE_RATE))
            with atomic_path(folder / name / f"{name}-{a:.0f}.npz") as tmp, open(tmp, "wb") as fh:
                np.savez(fh, strain=x[i:i + per_file], sample_rate=SAMPLE_RATE, t0=START + i / SAMPLE_RATE)
    with atomic_path(folder / "sites.toml") as tmp:
        Path(tmp).write_text(Path(EXAMPLE_SITES).read_text(encoding="utf-8"), encoding="utf-8")
    with atomic_path(folder / f"{VETO[0]}-vetoes.txt") as tmp:
        Path(tmp).write_text(f"# {VETO[0]}: times to leave out, GPS s (start end)\n"
                             f"{scenario.veto[0]!r} {scenario.veto[1]!r}\n", encoding="utf-8")
    write_analysis(folder / ANALYSIS_FILE, analysis_mapping(scenario, bank_table(folder)))
    done = Scenario(minutes=scenario.minutes, seed=scenario.seed, slides=scenario.slides,
                    injections=scenario.injections, files=scenario.files, gap=scenario.gap, veto=scenario.veto,
                    hidden=hidden, glitch=glitch)
    write_json_atomic(folder / SCENARIO_FILE, done.as_dict())
    return done


def read_scenario(folder) -> dict | None:
    """Read a demo folder's truth file: a dict, or None if the folder holds none.

    Parameters
    ----------
    folder : path

    Returns
    -------
    dict or None
    """
    import json

    path = Path(folder) / SCENARIO_FILE
    if not path.is_file():
        return None
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except (ValueError, UnicodeDecodeError):
        raise ValueError(f"{path} is damaged: remove the folder or give another --output") from None
