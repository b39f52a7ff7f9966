"""A real scalar field of mass m with cubic and quartic self-couplings.

Lagrangian: L = 1/2 (d phi)^2 - 1/2 m^2 phi^2 - (g/3!) phi^3 - (lambda/4!) phi^4.
"""

from __future__ import annotations

from ...keys import NUMBER, Key
from .registry import Model, ProcessSpec


def scalar_scattering(s, t, u, par):
    """phi phi -> phi phi at tree level: contact term plus s-, t- and u-channel exchange.

    M = -lambda - g^2 [1/(s - m^2) + 1/(t - m^2) + 1/(u - m^2)], |M|^2 with no spin to average.
    Contact term: Peskin & Schroeder (1995), sec. 4.6 (sigma = lambda^2 / (32 pi s) with the
    factor 1/2 for identical particles); exchange terms: Srednicki, Quantum Field Theory (2007),
    chapter 10 (from memory). Symmetry factor 1/2.
    """
    m2 = par["mass"] ** 2
    g2 = par["cubic"] ** 2
    amp = -par["quartic"] - g2 * (1.0 / (s - m2) + 1.0 / (t - m2) + 1.0 / (u - m2))
    return amp * amp


def _resolve(over):
    return {
        "mass": float(over.get("mass", 1.0)),
        "quartic": float(over.get("quartic", 1.0)),
        "cubic": float(over.get("cubic", 0.0)),
    }


MODEL = Model(
    name="scalar",
    doc="A real scalar 'phi' with cubic coupling g and quartic coupling lambda.",
    params={
        "mass": Key(NUMBER, 1.0, 0.0, 1e5, "GeV", "mass m of phi"),
        "quartic": Key(NUMBER, 1.0, -1e3, 1e3, "", "quartic coupling lambda"),
        "cubic": Key(NUMBER, 0.0, -1e5, 1e5, "GeV", "cubic coupling g"),
    },
    couplings=("quartic", "cubic"),
    resolve=_resolve,
    mass_params={"phi": "mass"},
    processes=(ProcessSpec("scalar", ("phi", "phi"), ("phi", "phi"), scalar_scattering,
                           scalar_scattering.__doc__, reference="scalar.scattering"),),
)
