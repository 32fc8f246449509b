"""Physical constants as plain cgs floats, converted once.

CODATA 2018 constants and the IAU 2015 Resolution B3 nominal solar values are
taken from astropy's frozen constant modules, so the numbers do not move when
astropy's default constant set changes (astropy 8 defaults to CODATA 2022).
The solar mass is GM_sun(nominal) / G(CODATA 2018): the IAU fixes GM, not M.
"""

from astropy.constants import codata2018 as _codata
from astropy.constants import iau2015 as _iau

C = _codata.c.cgs.value  # speed of light, cm/s
G = _codata.G.cgs.value  # gravitational constant, cm^3 g^-1 s^-2
K_B = _codata.k_B.cgs.value  # Boltzmann constant, erg/K
M_U = _codata.u.cgs.value  # atomic mass unit, g
M_E = _codata.m_e.cgs.value  # electron mass, g
SIGMA_T = _codata.sigma_T.cgs.value  # Thomson cross-section, cm^2
SIGMA_SB = _codata.sigma_sb.cgs.value  # Stefan-Boltzmann, erg cm^-2 s^-1 K^-4
A_RAD = 4.0 * SIGMA_SB / C  # radiation constant, erg cm^-3 K^-4

R_SUN = _iau.R_sun.cgs.value  # nominal solar radius, cm
L_SUN = _iau.L_sun.cgs.value  # nominal solar luminosity, erg/s
GM_SUN = _iau.GM_sun.cgs.value  # nominal solar mass parameter, cm^3 s^-2
M_SUN = GM_SUN / G  # solar mass, g
TEFF_SUN = 5772.0  # nominal solar effective temperature, K (IAU 2015 B3)

# Present-day solar photosphere, Asplund, Grevesse, Sauval & Scott 2009, ARA&A 47, 481, Table 4.
X_SUN = 0.7381  # hydrogen mass fraction
Z_SUN = 0.0134  # metal mass fraction

YEAR = 365.25 * 86400.0  # Julian year, s

CONSTANT_SET = "CODATA 2018, IAU 2015 Resolution B3"
H_PLANCK = _codata.h.cgs.value  # Planck constant, erg s
E_CHARGE = _codata.e.esu.value  # elementary charge, esu (statC)
EV = _codata.e.si.value * 1e7  # electron volt, erg
MEV = 1e6 * EV  # mega-electron volt, erg
N_A = _codata.N_A.value  # Avogadro constant, 1/mol
M_P = _codata.m_p.cgs.value  # proton mass, g
