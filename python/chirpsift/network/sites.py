"""Detector sites: position, arms, response, delays, antenna patterns, a TOML form.

Position on the WGS-84 ellipsoid, arm geometry, response tensor, arrival delays and
antenna patterns, and a small TOML form for a set of sites.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, fields
from functools import cached_property
from pathlib import Path

import numpy as np

from ..io.readers import read_toml
from .._validate import broadcast, real_array, real_scalar
from ..waveform import C_SI

__all__ = [
    "EXAMPLE_SITES",
    "WGS84_A",
    "WGS84_F",
    "Site",
    "greenwich_sidereal_time",
    "light_travel_time",
    "load_sites",
]

#: WGS-84 semi-major axis (m), a defining constant of the ellipsoid.
WGS84_A = 6378137.0
#: WGS-84 flattening, a defining constant of the ellipsoid.
WGS84_F = 1.0 / 298.257223563

#: The invented example sites shipped with chirpsift (for the demo and the tests).
EXAMPLE_SITES = Path(__file__).with_name("example_sites.toml")

#: Site names become column prefixes (``<site>_snr``): a letter, then letters, digits, ``_`` or ``-``.
_NAME = re.compile(r"^[A-Za-z][A-Za-z0-9_-]{0,63}$")
#: Smallest angle (degrees) allowed between the two arms: parallel arms have no response.
_MIN_ARM_ANGLE = 1.0
#: Largest |elevation| accepted (m): beyond it the value is almost surely in the wrong unit.
_MAX_ELEVATION = 1.0e5


def _describe(x) -> str:
    text = repr(x)
    return text if len(text) <= 80 else text[:77] + "..."


def greenwich_sidereal_time(gps_time):
    """Greenwich mean sidereal time (radians) at GPS times, from astropy.

    Parameters
    ----------
    gps_time : float or array_like
        GPS seconds (the GPS time scale: seconds since 1980-01-06 00:00:00 UTC, no leap
        seconds).

    Returns
    -------
    float or numpy.ndarray
        Sidereal angle in radians, in ``[0, 2 pi)``, the shape of ``gps_time``.

    Notes
    -----
    astropy converts GPS to UTC and TT with its own leap-second table and evaluates the
    IAU 2006 mean sidereal time (``Time(gps, format="gps").sidereal_time("mean",
    "greenwich")``). *Mean* rather than *apparent*: the sky angles users give are
    catalogue (mean-equinox) coordinates; the apparent time adds the equation of the
    equinoxes (nutation, at most 1.2 s of time), which belongs with true-of-date
    coordinates only. UT1 is taken equal to UTC (``delta_ut1_utc = 0``), so no Earth
    orientation table is downloaded and results do not depend on a network connection:
    ``|UT1 - UTC| < 0.9 s`` by the definition of UTC, which turns the Earth by less than
    14 arcseconds and moves arrival delays by under 1.5 microseconds. Catalogue
    coordinates are not precessed to the date: for J2000 positions in 2026 that shifts
    directions by about 0.36 degrees, arrival delays by at most 0.13 ms for a
    40,000 km baseline and antenna factors by under 1%.

    Examples
    --------
    >>> from chirpsift.network.sites import greenwich_sidereal_time
    >>> round(float(greenwich_sidereal_time(1.0e9)), 4)
    0.3369
    """
    from astropy.time import Time

    t = real_array("gps_time", gps_time, ndim=(0, 1, 2, 3), allow_empty=True)
    flat = np.atleast_1d(t).ravel()
    if flat.size == 0:
        return np.zeros(t.shape)
    times = Time(flat, format="gps")
    times.delta_ut1_utc = np.zeros(flat.size)
    gmst = np.asarray(times.sidereal_time("mean", "greenwich").rad, dtype=np.float64)
    gmst = np.mod(gmst, 2 * np.pi)
    return float(gmst[0]) if t.ndim == 0 else gmst.reshape(t.shape)


def _earth_fixed(latitude, longitude, elevation) -> np.ndarray:
    """Earth-fixed (geocentric Cartesian) position in metres of a geodetic WGS-84 point."""
    from astropy import units as u
    from astropy.coordinates import EarthLocation

    loc = EarthLocation.from_geodetic(
        lon=longitude * u.deg, lat=latitude * u.deg, height=elevation * u.m, ellipsoid="WGS84"
    )
    return np.array([loc.x.to_value(u.m), loc.y.to_value(u.m), loc.z.to_value(u.m)], dtype=np.float64)


def _local_axes(latitude, longitude):
    """Return the unit vectors East, North, Up (Earth-fixed) at a geodetic latitude/longitude (deg)."""
    phi, lam = math.radians(latitude), math.radians(longitude)
    east = np.array([-math.sin(lam), math.cos(lam), 0.0])
    north = np.array([-math.sin(phi) * math.cos(lam), -math.sin(phi) * math.sin(lam), math.cos(phi)])
    up = np.array([math.cos(phi) * math.cos(lam), math.cos(phi) * math.sin(lam), math.sin(phi)])
    return east, north, up


@dataclass(frozen=True)
class Site:
    """A detector site with two straight arms (an L- or V-shaped interferometer).

    Parameters
    ----------
    name : str
        A letter followed by letters, digits, ``_`` or ``-`` (it prefixes table columns).
    latitude : float
        Geodetic latitude on the WGS-84 ellipsoid, degrees north, in [-90, 90].
    longitude : float
        Longitude, degrees east, in [-180, 360).
    elevation : float
        Height above the WGS-84 ellipsoid (not the geoid), metres.
    x_azimuth, y_azimuth : float
        Direction of the first (x) and second (y) arm, degrees clockwise from local
        North (the surveyor's azimuth: 90 is East).
    x_altitude, y_altitude : float, optional
        Tilt of each arm above the local horizontal plane, degrees (default 0).

    Notes
    -----
    ``position`` is the Earth-fixed (geocentric, Earth-rotating Cartesian) position in
    metres, computed by astropy's WGS-84 geodetic conversion; the local axes are
    ``e_E = (-sin lam, cos lam, 0)``, ``e_N = (-sin phi cos lam, -sin phi sin lam, cos phi)``,
    ``e_U = (cos phi cos lam, cos phi sin lam, sin phi)``. An arm at azimuth ``A`` and
    altitude ``w`` points along ``cos w (sin A e_E + cos A e_N) + sin w e_U``. The
    response tensor is ``D = (x x^T - y y^T) / 2`` [1]_.

    Examples
    --------
    >>> from chirpsift import Site
    >>> s = Site("Wren", latitude=10.0, longitude=20.0, elevation=5.0, x_azimuth=0.0, y_azimuth=90.0)
    >>> s.position.round(0)
    array([5903034., 2148529., 1100249.])
    >>> float(abs(s.tensor.trace())) < 1e-15
    True

    References
    ----------
    .. [1] W. G. Anderson, P. R. Brady, J. D. E. Creighton and E. E. Flanagan,
       Phys. Rev. D 63, 042003 (2001), gr-qc/0008066, appendix B.
    """

    name: str
    latitude: float
    longitude: float
    elevation: float
    x_azimuth: float
    y_azimuth: float
    x_altitude: float = 0.0
    y_altitude: float = 0.0

    def __post_init__(self):
        if not isinstance(self.name, str) or not _NAME.match(self.name):
            raise ValueError(
                f"site name must start with a letter and hold only letters, digits, '_' or '-' "
                f"(at most 64 characters), got {_describe(self.name)}"
            )
        for f in fields(self)[1:]:
            value = real_scalar(f"{f.name} of site {self.name!r}", getattr(self, f.name))
            object.__setattr__(self, f.name, value)
        if not -90.0 <= self.latitude <= 90.0:
            raise ValueError(f"latitude of site {self.name!r} must be in [-90, 90] degrees, got {self.latitude}")
        if not -180.0 <= self.longitude < 360.0:
            raise ValueError(f"longitude of site {self.name!r} must be in [-180, 360) degrees, got {self.longitude}")
        if abs(self.elevation) > _MAX_ELEVATION:
            raise ValueError(
                f"elevation of site {self.name!r} must be within +-{_MAX_ELEVATION:g} m of the ellipsoid, "
                f"got {self.elevation} (metres, not km?)"
            )
        for arm in ("x_altitude", "y_altitude"):
            value = getattr(self, arm)
            if not -90.0 <= value <= 90.0:
                raise ValueError(f"{arm} of site {self.name!r} must be in [-90, 90] degrees, got {value}")
        x, y = self.arms
        angle = math.degrees(math.acos(max(-1.0, min(1.0, float(x @ y)))))
        if angle < _MIN_ARM_ANGLE or angle > 180.0 - _MIN_ARM_ANGLE:
            raise ValueError(
                f"the arms of site {self.name!r} are {angle:.3g} degrees apart (x_azimuth={self.x_azimuth}, "
                f"y_azimuth={self.y_azimuth}): parallel arms have no response"
            )

    @cached_property
    def position(self) -> np.ndarray:
        """Earth-fixed position (m), shape (3,)."""
        return _earth_fixed(self.latitude, self.longitude, self.elevation)

    @cached_property
    def arms(self) -> tuple[np.ndarray, np.ndarray]:
        """Unit vectors of the x and y arms in Earth-fixed coordinates."""
        east, north, up = _local_axes(self.latitude, self.longitude)
        out = []
        for az, alt in ((self.x_azimuth, self.x_altitude), (self.y_azimuth, self.y_altitude)):
            a, w = math.radians(az), math.radians(alt)
            out.append(math.cos(w) * (math.sin(a) * east + math.cos(a) * north) + math.sin(w) * up)
        return out[0], out[1]

    @cached_property
    def tensor(self) -> np.ndarray:
        """Response tensor ``D = (x x^T - y y^T) / 2`` (dimensionless), shape (3, 3)."""
        x, y = self.arms
        return 0.5 * (np.outer(x, x) - np.outer(y, y))

    def arrival_delay(self, ra, dec, gps_time):
        """Arrival time at this site minus arrival time at the Earth's centre (s).

        Parameters
        ----------
        ra, dec : float or array_like
            Right ascension and declination of the source, radians (equatorial; see
            :func:`greenwich_sidereal_time` for the frame).
        gps_time : float or array_like
            GPS time (s) of arrival at the Earth's centre. The three arguments broadcast.

        Returns
        -------
        float or numpy.ndarray
            ``-r . n / c`` seconds, ``r`` the site position and ``n`` the unit vector
            toward the source in Earth-fixed coordinates; its magnitude is at most the
            site's distance from the centre over ``c``.

        Examples
        --------
        >>> import numpy as np
        >>> from chirpsift import Site
        >>> s = Site("Wren", 0.0, 0.0, 0.0, 0.0, 90.0)
        >>> from chirpsift.network.sites import greenwich_sidereal_time
        >>> t = 1.0e9
        >>> overhead = s.arrival_delay(greenwich_sidereal_time(t), 0.0, t)  # source at the zenith
        >>> round(overhead * 1e3, 4)   # -a / c, in ms: the wave reaches the site first
        -21.2752
        """
        n, _, _, shape = _source_frame(ra, dec, gps_time)
        delay = -(n @ self.position) / C_SI
        return float(delay[0]) if shape == () else delay.reshape(shape)

    def antenna_pattern(self, ra, dec, psi, gps_time):
        """Antenna factors ``(F_plus, F_cross)`` of this site for sources on the sky.

        Parameters
        ----------
        ra, dec : float or array_like
            Right ascension and declination of the source, radians.
        psi : float or array_like
            Polarisation angle, radians (convention in Notes).
        gps_time : float or array_like
            GPS time (s). The four arguments broadcast together.

        Returns
        -------
        F_plus, F_cross : float or numpy.ndarray
            Dimensionless, in [-1, 1].

        Notes
        -----
        With ``n`` the unit vector toward the source and ``e_a``, ``e_d`` the unit
        vectors of increasing right ascension and declination at the source, the wave
        axes are ``m = cos(psi) e_a + sin(psi) e_d`` and ``l = -sin(psi) e_a + cos(psi) e_d``;
        ``e_plus = m m^T - l l^T``, ``e_cross = m l^T + l m^T``, ``F_plus = D : e_plus``,
        ``F_cross = D : e_cross`` [1]_. For a source at the zenith of a site whose x arm
        points East and y arm North this gives ``F_plus = cos 2 psi`` and
        ``F_cross = -sin 2 psi``; papers differ in the sign and origin of ``psi``, while
        ``F_plus^2 + F_cross^2`` does not depend on it. A signal ``h_plus``, ``h_cross``
        is seen as ``F_plus h_plus + F_cross h_cross``.

        References
        ----------
        .. [1] W. G. Anderson et al., Phys. Rev. D 63, 042003 (2001), gr-qc/0008066.

        Examples
        --------
        >>> from chirpsift import Site
        >>> s = Site("Wren", 0.0, 0.0, 0.0, x_azimuth=90.0, y_azimuth=0.0)
        >>> from chirpsift.network.sites import greenwich_sidereal_time
        >>> fp, fx = s.antenna_pattern(greenwich_sidereal_time(1e9), 0.0, 0.3, 1e9)
        >>> round(fp, 6), round(fx, 6)   # cos(0.6), -sin(0.6)
        (0.825336, -0.564642)
        """
        _n, ea, ed, shape = _source_frame(ra, dec, gps_time, psi)
        psi_b = np.broadcast_to(np.asarray(psi, dtype=np.float64), shape).ravel()
        c, s = np.cos(psi_b)[:, None], np.sin(psi_b)[:, None]
        m = c * ea + s * ed
        ell = -s * ea + c * ed
        dm = m @ self.tensor
        dl = ell @ self.tensor
        f_plus = np.einsum("ij,ij->i", dm, m) - np.einsum("ij,ij->i", dl, ell)
        f_cross = 2.0 * np.einsum("ij,ij->i", dm, ell)
        if shape == ():
            return float(f_plus[0]), float(f_cross[0])
        return f_plus.reshape(shape), f_cross.reshape(shape)


def _source_frame(ra, dec, gps_time, psi=None):
    """Earth-fixed unit vectors toward the source and of increasing RA and Dec, flattened."""
    names = ["ra", "dec", "gps_time"] + ([] if psi is None else ["psi"])
    values = [ra, dec, gps_time] + ([] if psi is None else [psi])
    arrays = [real_array(n, v, ndim=(0, 1, 2, 3), allow_empty=True) for n, v in zip(names, values)]
    b = broadcast(names, arrays)
    shape = b[0].shape
    ra_f, dec_f, t_f = (np.asarray(a, dtype=np.float64).ravel() for a in b[:3])
    if np.any(np.abs(dec_f) > np.pi / 2 + 1e-12):
        i = int(np.argmax(np.abs(dec_f) > np.pi / 2 + 1e-12))
        raise ValueError(f"dec must be in [-pi/2, pi/2] radians, got {dec_f[i]} (degrees given as radians?)")
    # One sidereal-time evaluation per distinct time (often a single time for many directions).
    times, inverse = np.unique(t_f, return_inverse=True)
    gmst = np.atleast_1d(greenwich_sidereal_time(times))[inverse.ravel()] if t_f.size else t_f
    phi = ra_f - gmst
    cd, sd, cp, sp = np.cos(dec_f), np.sin(dec_f), np.cos(phi), np.sin(phi)
    n = np.stack([cd * cp, cd * sp, sd], axis=1)
    ea = np.stack([-sp, cp, np.zeros_like(cp)], axis=1)
    ed = np.stack([-sd * cp, -sd * sp, cd], axis=1)
    return n, ea, ed, shape


def light_travel_time(site_a: Site, site_b: Site) -> float:
    """Light travel time between two sites (s): their straight-line distance over ``c``.

    Parameters
    ----------
    site_a, site_b : Site

    Returns
    -------
    float
        Seconds; no arrival-time difference between the sites exceeds it.

    Examples
    --------
    >>> from chirpsift import Site, light_travel_time
    >>> a = Site("Wren", 0.0, 0.0, 0.0, 0.0, 90.0)
    >>> b = Site("Finch", 0.0, 90.0, 0.0, 0.0, 90.0)
    >>> round(light_travel_time(a, b) * 1e3, 3)   # sqrt(2) * 6378137 m / c, ms
    30.088
    """
    for name, s in (("site_a", site_a), ("site_b", site_b)):
        if not isinstance(s, Site):
            raise TypeError(f"{name} must be a chirpsift.Site, got {_describe(s)}")
    return float(np.linalg.norm(site_a.position - site_b.position) / C_SI)


# ---------------------------------------------------------------------------
# the sites file
# ---------------------------------------------------------------------------
_REQUIRED = ("name", "latitude", "longitude", "elevation", "x_azimuth", "y_azimuth")
_OPTIONAL = ("x_altitude", "y_altitude")
SITES_FORMAT_VERSION = 1


def load_sites(path) -> dict[str, Site]:
    """Read a set of sites from a TOML file.

    Parameters
    ----------
    path : str or os.PathLike
        TOML file holding one ``[[site]]`` table per site (format below).

    Returns
    -------
    dict
        Site name to :class:`Site`, in file order.

    Raises
    ------
    ValueError
        A malformed file: bad TOML, no sites, a missing or unknown key, a value of the
        wrong type or range, or a repeated name. The message names the file, the site and
        the key.

    Notes
    -----
    The file is chirpsift's own form::

        version = 1                 # optional; this format's version
        [[site]]
        name = "Kestrel"
        latitude = 51.3             # degrees north, geodetic (WGS-84)
        longitude = 18.9            # degrees east
        elevation = 210.0           # metres above the WGS-84 ellipsoid
        x_azimuth = 25.0            # degrees clockwise from North
        y_azimuth = 115.0
        x_altitude = 0.0            # optional, degrees above the horizontal
        y_altitude = 0.0            # optional

    ``chirpsift.network.EXAMPLE_SITES`` is such a file with three invented sites.

    Examples
    --------
    >>> from chirpsift import load_sites
    >>> from chirpsift.network import EXAMPLE_SITES
    >>> sorted(load_sites(EXAMPLE_SITES))
    ['Heron', 'Kestrel', 'Plover']
    """
    p, doc = read_toml(path, what="sites file")
    unknown = sorted(set(doc) - {"version", "site"})
    if unknown:
        raise ValueError(
            f"sites file {p}: unknown top-level key {unknown[0]!r} (expected 'version' and [[site]] tables)"
        )
    if "version" in doc and doc["version"] != SITES_FORMAT_VERSION:
        raise ValueError(f"sites file {p}: version must be {SITES_FORMAT_VERSION}, got {_describe(doc['version'])}")
    entries = doc.get("site")
    if not isinstance(entries, list) or not entries or not all(isinstance(e, dict) for e in entries):
        raise ValueError(f"sites file {p}: expected one or more [[site]] tables, got {_describe(entries)}")
    sites: dict[str, Site] = {}
    for n, entry in enumerate(entries, 1):
        label = f"site #{n}" + (f" ({entry['name']!r})" if isinstance(entry.get("name"), str) else "")
        extra = sorted(set(entry) - set(_REQUIRED) - set(_OPTIONAL))
        if extra:
            raise ValueError(f"sites file {p}: {label} has unknown key {extra[0]!r}")
        missing = [k for k in _REQUIRED if k not in entry]
        if missing:
            raise ValueError(f"sites file {p}: {label} lacks the key {missing[0]!r}")
        for key in _REQUIRED[1:] + _OPTIONAL:
            if key in entry and (isinstance(entry[key], bool) or not isinstance(entry[key], (int, float))):
                raise ValueError(f"sites file {p}: {label} key {key!r} must be a number, got {_describe(entry[key])}")
        try:
            site = Site(**entry)
        except (TypeError, ValueError) as exc:
            raise ValueError(f"sites file {p}: {label}: {exc}") from None
        if site.name in sites:
            raise ValueError(f"sites file {p}: site name {site.name!r} appears more than once")
        sites[site.name] = site
    return sites
