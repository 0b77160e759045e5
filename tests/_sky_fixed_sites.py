"""Test doubles for sites: detectors held fixed in the equatorial frame (no Earth
rotation), with the textbook response and delay formulas written out here,
independently of chirpsift, so that projection tests compare against them.

Response: detector tensor D = (x x^T - y y^T) / 2 from the arm unit vectors;
F+ = D : e+, Fx = D : ex, e+ = m m^T - n n^T, ex = m n^T + n m^T, with (m, n) the wave
axes orthogonal to the direction of the source k, rotated by the polarisation angle
(Anderson, Brady, Creighton & Flanagan 2001, PRD 63, 042003, gr-qc/0008066, App. B;
shared REFERENCES item 16). Delay: t_site - t_geo = -r . k / c (item 16).
"""

import numpy as np

C = 299792458.0


def source_direction(ra, dec):
    ra, dec = np.asarray(ra, float), np.asarray(dec, float)
    return np.stack([np.cos(dec) * np.cos(ra), np.cos(dec) * np.sin(ra), np.sin(dec)], axis=-1)


def wave_axes(ra, dec, psi):
    ra, dec, psi = (np.asarray(v, float) for v in (ra, dec, psi))
    # east-pointing and north-pointing unit vectors on the sky at the source, rotated by psi
    e = np.stack([-np.sin(ra), np.cos(ra), np.zeros_like(ra)], axis=-1)
    nth = np.stack([-np.sin(dec) * np.cos(ra), -np.sin(dec) * np.sin(ra), np.cos(dec)], axis=-1)
    c, s = np.cos(psi)[..., None], np.sin(psi)[..., None]
    return c * e + s * nth, -s * e + c * nth


class SkyFixedSite:
    """An L-shaped detector at position ``position`` (m) with arms along ``x_arm``,
    ``y_arm`` (unit vectors, orthogonal), all in the equatorial frame."""

    def __init__(self, name, position, x_arm, y_arm):
        self.name = name
        self.position = np.asarray(position, float)
        x, y = np.asarray(x_arm, float), np.asarray(y_arm, float)
        x, y = x / np.linalg.norm(x), y / np.linalg.norm(y)
        assert abs(x @ y) < 1e-12
        self.tensor = 0.5 * (np.outer(x, x) - np.outer(y, y))

    def antenna_pattern(self, ra, dec, psi, gps_time):
        m, n = wave_axes(ra, dec, psi)
        ep = np.einsum("...i,...j->...ij", m, m) - np.einsum("...i,...j->...ij", n, n)
        ex = np.einsum("...i,...j->...ij", m, n) + np.einsum("...i,...j->...ij", n, m)
        return np.einsum("ij,...ij->...", self.tensor, ep), np.einsum("ij,...ij->...", self.tensor, ex)

    def arrival_delay(self, ra, dec, gps_time):
        return -(source_direction(ra, dec) @ self.position) / C


class FixedResponse:
    """A site that sees every source with the given F+, Fx and delay (s)."""

    def __init__(self, name, f_plus, f_cross, delay=0.0):
        self.name, self.fp, self.fx, self.delay = name, f_plus, f_cross, delay

    def antenna_pattern(self, ra, dec, psi, gps_time):
        ra = np.asarray(ra, float)
        return np.full(ra.shape, self.fp), np.full(ra.shape, self.fx)

    def arrival_delay(self, ra, dec, gps_time):
        return np.full(np.shape(ra), self.delay)


def unit(v):
    v = np.asarray(v, float)
    return v / np.linalg.norm(v)


def two_sites():
    """Two invented sites about 3,000 km apart with differently oriented arms."""
    r = 6.371e6
    pa = r * unit([1.0, 0.2, 0.5])
    pb = r * unit([0.7, 0.6, 0.45])
    # arms: tangent-plane pairs at each site
    def arms(p, angle):
        up = unit(p)
        east = unit(np.cross([0.0, 0.0, 1.0], up))
        north = np.cross(up, east)
        x = np.cos(angle) * north + np.sin(angle) * east
        y = np.cross(up, x)
        return x, y
    return (SkyFixedSite("Aster", pa, *arms(pa, 0.4)), SkyFixedSite("Borealis", pb, *arms(pb, 1.3)))
