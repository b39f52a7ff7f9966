"""Physical constants in the package's units (GeV, pb), from maintained sources.

The CODATA values are written here (CODATA 2022, as `scipy.constants` 1.17 gives them) rather
than read from `scipy.constants` at run time: importing scipy.constants made every run start
about 0.3 s later (it pulls in numpy's testing, polynomial and f2py modules).
tests/test_parameters.py checks them against `scipy.constants`. (hbar c)^2 is the exact PDG value.
"""

from __future__ import annotations

__all__ = ["HBARC2_PB", "ALPHA_MZ", "SW2_EFFECTIVE", "ALPHA_0", "G_FERMI", "HBAR_EV_S", "alpha_0", "g_fermi",
           "hbar_gev_s"]

#: (hbar c)^2 in pb GeV^2 (PDG RPP Table 1.1; exact since the 2019 SI redefinition).
HBARC2_PB = 0.3893793721e9

#: alpha at the Z mass, 1/127.951 (PDG electroweak review, MS-bar value; from memory).
ALPHA_MZ = 1.0 / 127.951

#: Effective leptonic weak mixing angle sin^2(theta_eff) (LEP/SLC, Phys. Rept. 427 (2006) 257).
SW2_EFFECTIVE = 0.23153

#: fine-structure constant at zero momentum transfer (CODATA 2022)
ALPHA_0 = 0.0072973525643
#: Fermi coupling constant G_F / (hbar c)^3 in GeV^-2 (CODATA 2022)
G_FERMI = 1.1663787e-05
#: reduced Planck constant in eV s (CODATA 2022; exact since the 2019 SI redefinition)
HBAR_EV_S = 6.582119569509067e-16


def alpha_0() -> float:
    """Fine-structure constant at zero momentum transfer (CODATA 2022)."""
    return ALPHA_0


def g_fermi() -> float:
    """Fermi constant in GeV^-2 (CODATA 2022)."""
    return G_FERMI


def hbar_gev_s() -> float:
    """hbar in GeV s (CODATA 2022)."""
    return HBAR_EV_S * 1e-9
