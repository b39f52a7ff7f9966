"""Particle identities: names, PDG Monte Carlo numbers, charges and PDG masses and widths.

Masses and widths (GeV) are the PDG values of the `particle` package, written out in
`pdg_values.py` (loading that package's table costs about 0.3 s per start). A model may
override them from the card; the resolved values go to the file metadata. The names are the
ones a card uses; PDG ids are accepted too.
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from functools import lru_cache

from ..errors import CardError, close_matches

__all__ = ["Species", "species", "lookup", "antiparticle", "SCALAR_ID", "known_names", "GROUPS", "HADRON_PARTONS"]

#: PDG-style id this project gives the real scalar of the scalar model. The PDG numbering has no
#: entry for it; the number is outside the ranges the numbering assigns (common practice, no source).
SCALAR_ID = 9900001


@dataclass(frozen=True)
class Species:
    """One particle species. Mass and width in GeV (PDG, read from `particle` on first use);
    charge in units of e; t3 of the left-handed state."""

    name: str
    pdg: int
    charge: float
    t3: float
    colour: int  # 1 singlet, 3 triplet, -3 anti-triplet, 8 octet
    spin2: int  # twice the spin
    #: for a group (a name standing for any of several particles): the member names
    members: tuple[str, ...] = ()

    @property
    def mass(self) -> float:
        return 0.0 if self.members else _pdg_mass_width(abs(self.pdg))[0]

    @property
    def width(self) -> float:
        return 0.0 if self.members else _pdg_mass_width(abs(self.pdg))[1]

    @property
    def lepton_numbers(self) -> tuple[int, int, int]:
        """(L_e, L_mu, L_tau): +1 for a charged lepton or neutrino of that generation, -1 for its antiparticle."""
        gen = {11: 0, 12: 0, 13: 1, 14: 1, 15: 2, 16: 2}.get(abs(self.pdg))
        out = [0, 0, 0]
        if gen is not None:
            out[gen] = 1 if self.pdg > 0 else -1
        return tuple(out)

    @property
    def quark_number(self) -> int:
        """+1 for a quark, -1 for an antiquark, 0 otherwise (three times the baryon number)."""
        return (1 if self.pdg > 0 else -1) if self.is_quark else 0

    @property
    def is_quark(self) -> bool:
        return abs(self.colour) == 3

    @property
    def is_group(self) -> bool:
        return bool(self.members)

    @property
    def is_hadron(self) -> bool:
        return self.name in HADRON_PARTONS


# name, pdg, charge, t3 (of the left-handed particle state), colour, 2*spin
_TABLE = [
    ("e-", 11, -1, -0.5, 1, 1), ("e+", -11, 1, 0.5, 1, 1),
    ("mu-", 13, -1, -0.5, 1, 1), ("mu+", -13, 1, 0.5, 1, 1),
    ("tau-", 15, -1, -0.5, 1, 1), ("tau+", -15, 1, 0.5, 1, 1),
    ("nu_e", 12, 0, 0.5, 1, 1), ("nu_ebar", -12, 0, -0.5, 1, 1),
    ("nu_mu", 14, 0, 0.5, 1, 1), ("nu_mubar", -14, 0, -0.5, 1, 1),
    ("nu_tau", 16, 0, 0.5, 1, 1), ("nu_taubar", -16, 0, -0.5, 1, 1),
    ("d", 1, Fraction(-1, 3), -0.5, 3, 1), ("dbar", -1, Fraction(1, 3), 0.5, -3, 1),
    ("u", 2, Fraction(2, 3), 0.5, 3, 1), ("ubar", -2, Fraction(-2, 3), -0.5, -3, 1),
    ("s", 3, Fraction(-1, 3), -0.5, 3, 1), ("sbar", -3, Fraction(1, 3), 0.5, -3, 1),
    ("c", 4, Fraction(2, 3), 0.5, 3, 1), ("cbar", -4, Fraction(-2, 3), -0.5, -3, 1),
    ("b", 5, Fraction(-1, 3), -0.5, 3, 1), ("bbar", -5, Fraction(1, 3), 0.5, -3, 1),
    ("t", 6, Fraction(2, 3), 0.5, 3, 1), ("tbar", -6, Fraction(-2, 3), -0.5, -3, 1),
    ("g", 21, 0, 0, 8, 2), ("gamma", 22, 0, 0, 1, 2),
    ("Z", 23, 0, 0, 1, 2), ("W+", 24, 1, 0, 1, 2), ("W-", -24, -1, 0, 1, 2),
    ("H", 25, 0, 0, 1, 0),
    ("phi", SCALAR_ID, 0, 0, 1, 0),
    ("p", 2212, 1, 0, 1, 1), ("pbar", -2212, -1, 0, 1, 1),
]

_LIGHT = ("d", "u", "s", "c", "b")

#: partons a hadron beam holds in the five-flavour scheme (densities from the parton-density set)
HADRON_PARTONS: dict[str, tuple[str, ...]] = {
    h: tuple(q + "bar" for q in reversed(_LIGHT)) + ("g",) + _LIGHT for h in ("p", "pbar")}

#: names that stand for any of several particles in a hadron-collider process
GROUPS: dict[str, tuple[str, ...]] = {
    "jet": ("g",) + _LIGHT + tuple(q + "bar" for q in _LIGHT),
    "quark": _LIGHT, "antiquark": tuple(q + "bar" for q in _LIGHT),
    "l-": ("e-", "mu-"), "l+": ("e+", "mu+"),
    "nu": ("nu_e", "nu_mu"), "nubar": ("nu_ebar", "nu_mubar"),
}

_ALIASES = {
    "electron": "e-", "positron": "e+", "photon": "gamma", "muon": "mu-", "antimuon": "mu+",
    "gluon": "g", "higgs": "H", "Z0": "Z", "H0": "H", "a": "gamma", "proton": "p", "antiproton": "pbar",
}

_BY_NAME = {row[0]: row for row in _TABLE}
_BY_PDG = {row[1]: row for row in _TABLE}


def known_names() -> list[str]:
    return [row[0] for row in _TABLE] + list(GROUPS)


@lru_cache(maxsize=None)
def _pdg_mass_width(pdg: int) -> tuple[float, float]:
    if pdg == SCALAR_ID:
        return 0.0, 0.0
    from .pdg_values import MASS_WIDTH

    if abs(pdg) in MASS_WIDTH:
        return MASS_WIDTH[abs(pdg)]
    from particle import Particle

    p = Particle.from_pdgid(pdg)
    mass = (p.mass or 0.0) * 1e-3
    width = (p.width or 0.0) * 1e-3
    return mass, width


@lru_cache(maxsize=None)
def species(name: str) -> Species:
    """The species of a canonical name (see `known_names`), with PDG mass and width in GeV."""
    if name in GROUPS:
        return Species(name, 0, 0.0, 0.0, 1, 0, GROUPS[name])
    row = _BY_NAME[name]
    return Species(row[0], row[1], float(row[2]), row[3], row[4], row[5])


def antiparticle(name: str) -> str:
    """The name of the antiparticle (a self-conjugate particle is its own)."""
    pdg = species(name).pdg
    row = _BY_PDG.get(-pdg)
    return name if row is None else row[0]


def lookup(token: object, source: str = "<card>", key: str = "") -> Species:
    """Resolve a card token (a name, an alias or a PDG id) to a Species, or raise CardError."""
    if isinstance(token, bool) or not isinstance(token, (str, int)):
        raise CardError(source, key, f"expected a particle name or PDG id, found {token!r}")
    if isinstance(token, int):
        if token in _BY_PDG:
            return species(_BY_PDG[token][0])
        raise CardError(source, key, f"PDG id {token} is not a particle gen knows; known ids: "
                        + ", ".join(str(r[1]) for r in _TABLE))
    name = _ALIASES.get(token, token)
    if name in _BY_NAME or name in GROUPS:
        return species(name)
    try:
        return lookup(int(token), source, key)
    except ValueError:
        pass
    hint = close_matches(token, list(_BY_NAME) + list(_ALIASES) + list(GROUPS))
    raise CardError(source, key, f"unknown particle {token!r}{hint}; known names: " + ", ".join(known_names()))
