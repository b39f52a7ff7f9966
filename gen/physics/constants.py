"""Physical constants in the package's units (GeV, pb), from maintained sources.

CODATA values come from `scipy.constants`, read on first use (importing scipy costs a noticeable
part of a command's start-up); (hbar c)^2 is the exact PDG value.
"""

from __future__ import annotations

from functools import lru_cache

__all__ = ["HBARC2_PB", "ALPHA_MZ", "SW2_EFFECTIVE", "alpha_0", "g_fermi", "hbar_gev_s"]

#: (hbar c)^2 in pb GeV^2 (PDG RPP Table 1.1; exact since the 2019 SI redefinition).
HBARC2_PB = 0.3893793721e9

#: alpha at the Z mass, 1/127.951 (PDG electroweak review, MS-bar value; from memory).
ALPHA_MZ = 1.0 / 127.951

#: Effective leptonic weak mixing angle sin^2(theta_eff) (LEP/SLC, Phys. Rept. 427 (2006) 257).
SW2_EFFECTIVE = 0.23153


@lru_cache(maxsize=None)
def _codata(name: str) -> float:
    import scipy.constants as sc

    return float(sc.physical_constants[name][0])


def alpha_0() -> float:
    """Fine-structure constant at zero momentum transfer (CODATA, via scipy.constants)."""
    return _codata("fine-structure constant")


def g_fermi() -> float:
    """Fermi constant in GeV^-2 (CODATA, via scipy.constants)."""
    return _codata("Fermi coupling constant")


def hbar_gev_s() -> float:
    """hbar in GeV s (CODATA, via scipy.constants)."""
    return _codata("reduced Planck constant in eV s") * 1e-9
