"""Physical constants used throughout covergrid.

Every name carries its unit; every value names its source. Inside the package all
angles are radians, lengths kilometres, times seconds.
"""

from __future__ import annotations

import math

# --- WGS 84 (NIMA TR8350.2, 3rd ed., 2000, Table 3.1 and 3.3) -------------------------
WGS84_A_KM = 6378.137  # semi-major axis, NIMA TR8350.2 Table 3.1
WGS84_INV_F = 298.257223563  # inverse flattening, NIMA TR8350.2 Table 3.1
WGS84_F = 1.0 / WGS84_INV_F
WGS84_B_KM = WGS84_A_KM * (1.0 - WGS84_F)  # semi-minor axis (derived)
WGS84_E2 = WGS84_F * (2.0 - WGS84_F)  # first eccentricity squared (derived)
# GM including the atmosphere, 3.986004418e14 m^3/s^2, NIMA TR8350.2 Table 3.1
MU_EARTH_KM3_S2 = 398600.4418
OMEGA_EARTH_RAD_S = 7.292115e-5  # mean angular velocity, NIMA TR8350.2 Table 3.1

# Equatorial radius used with J2 (EGM96 reference radius equals the WGS 84 a).
EARTH_RADIUS_KM = WGS84_A_KM

# --- Zonal harmonic ------------------------------------------------------------------
# EGM96 normalised C20 = -0.484165371736e-3 (Lemoine et al., NASA/TP-1998-206861);
# J2 = -sqrt(5) * C20bar = 1.0826266836e-3.
J2 = 1.0826266836e-3

# --- Time ----------------------------------------------------------------------------
SECONDS_PER_DAY = 86400.0
JD_J2000 = 2451545.0  # Julian date of J2000.0 (2000-01-01 12:00 TT), IAU convention
# Mean tropical year used for the sun-synchronous node rate: 365.2421897 days
# (Vallado, Fundamentals of Astrodynamics and Applications, 4th ed., sec. 11.4.1; from memory).
TROPICAL_YEAR_DAYS = 365.2421897
# Sidereal day, 86164.0905 s (common practice).
SIDEREAL_DAY_S = 86164.0905

# --- Astronomy ------------------------------------------------------------------------
AU_KM = 149597870.7  # astronomical unit, IAU 2012 Resolution B2 (exact by definition)
# Nominal solar mass parameter GM_sun = 1.3271244e20 m^3/s^2, IAU 2015 Resolution B3
# (from memory).
MU_SUN_KM3_S2 = 1.3271244e11
# Radius of the Earth's sphere of influence with respect to the Sun, Laplace's
# r = a (m / M)^(2/5) with a = 1 AU (Curtis, Orbital Mechanics for Engineering Students,
# 3rd ed., sec. 8.4; from memory): 924,600 km, which Curtis's Table A.2 rounds to
# 925,000 km (from memory). No orbit reaching beyond it is an Earth orbit, so studies and
# the elements command refuse apogees and positions beyond it.
EARTH_SOI_RADIUS_KM = AU_KM * (MU_EARTH_KM3_S2 / MU_SUN_KM3_S2) ** 0.4

TWO_PI = 2.0 * math.pi
DEG = math.pi / 180.0
