"""Physical constants used throughout the reference kernels.

All values are exact by definition (SI and IAU resolutions) or follow from
exact values by arithmetic, so every implementation can reproduce them bit for
bit.

References
----------
.. [1] Prsa, A. et al. 2016, "Nominal values for selected solar and planetary
   quantities: IAU 2015 Resolution B3", AJ 152, 41, arXiv:1605.09788.
.. [2] IAU 2012 Resolution B2 (astronomical unit) and IAU 2015 Resolution B2
   (parsec).
"""

#: Speed of light in vacuum, m/s (exact, SI).
C_SI = 299792458.0

#: Nominal solar mass parameter (G M)_sun, m^3 s^-2 (exact, IAU 2015 B3).
GM_SUN_SI = 1.3271244e20

#: Solar mass expressed in seconds, G M_sun / c^3 = 4.925490947641267e-6 s.
T_SUN = GM_SUN_SI / C_SI**3

#: Astronomical unit, m (exact, IAU 2012 B2).
AU_SI = 149597870700.0

#: One megaparsec in metres, 1e6 * (648000 / pi) au = 3.0856775814913673e22 m.
MPC = 3.0856775814913673e22

__all__ = ["C_SI", "GM_SUN_SI", "T_SUN", "AU_SI", "MPC"]
