"""Physical constants, in the units used throughout: AU, yr, M_sun.

Sources
-------
IAU 2015 Resolution B3 nominal values (Prsa et al. 2016, AJ 152, 41):
    GM_sun = 1.3271244e20 m^3 s^-2, GM_J = 1.2668653e17 m^3 s^-2,
    R_sun = 6.957e8 m, R_J (equatorial) = 7.1492e7 m.
IAU 2012 Resolution B2: 1 au = 149 597 870 700 m.
Julian year = 365.25 d of 86 400 s (IAU convention).

Conversions to AU / yr / M_sun are made here once; the rest of the package works
in those units only and converts at the edges (spec reading, RV velocities).
"""

import math

__all__ = [
    "AU_M",
    "YEAR_S",
    "DAY_S",
    "GM_SUN_SI",
    "GM_JUP_SI",
    "R_SUN_M",
    "R_JUP_M",
    "MJUP_MSUN",
    "R_SUN_AU",
    "R_JUP_AU",
    "G_AU_YR_MSUN",
    "AU_PER_YR_MS",
    "G_SI",
    "M_SUN_KG",
]

AU_M = 149_597_870_700.0  # IAU 2012 B2
DAY_S = 86_400.0
YEAR_S = 365.25 * DAY_S  # Julian year
GM_SUN_SI = 1.3271244e20  # IAU 2015 B3, m^3 s^-2
GM_JUP_SI = 1.2668653e17  # IAU 2015 B3, m^3 s^-2
R_SUN_M = 6.957e8  # IAU 2015 B3, nominal solar radius
R_JUP_M = 7.1492e7  # IAU 2015 B3, nominal equatorial Jupiter radius

MJUP_MSUN = GM_JUP_SI / GM_SUN_SI  # 9.5458e-4
R_SUN_AU = R_SUN_M / AU_M
R_JUP_AU = R_JUP_M / AU_M
G_AU_YR_MSUN = GM_SUN_SI * YEAR_S**2 / AU_M**3  # 39.4769...; REBOUND's ('yr','AU','Msun') G
AU_PER_YR_MS = AU_M / YEAR_S  # 1 AU/yr in m/s

G_SI = 6.67430e-11  # CODATA 2018, m^3 kg^-1 s^-2
M_SUN_KG = GM_SUN_SI / G_SI  # nominal solar mass in kg (IAU 2015 B3 defines (GM)_sun; G from CODATA 2018)

# Bulk density (g cm^-3) -> M_sun / AU^3
GCM3_MSUN_AU3 = 1e3 * AU_M**3 / M_SUN_KG
TWO_PI = 2.0 * math.pi
