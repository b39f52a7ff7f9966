"""PDG masses and widths (GeV) of the particles gen knows, by |PDG id|, as the `particle` package
1.1.0 gives them (its PDG data), written out because loading that package's full table
costs about 0.3 s at every start. tests/test_particles.py holds them to `particle` itself;
regenerate with `python -m gen.physics.pdg_values` after a new PDG edition.
"""

from __future__ import annotations

__all__ = ["MASS_WIDTH", "PARTICLE_VERSION", "table_text"]

PARTICLE_VERSION = "1.1.0"

#: |PDG id| -> (mass, width) in GeV; 0 where the PDG gives none
MASS_WIDTH: dict[int, tuple[float, float]] = {
    1: (0.0047, 0.0),  # d
    2: (0.00216, 0.0),  # u
    3: (0.09290000000000001, 0.0),  # s
    4: (1.2730000000000001, 0.0),  # c
    5: (4.186, 0.0),  # b
    6: (172.6, 1.42),  # t
    11: (0.0005109989506900001, 0.0),  # e-
    12: (0.0, 0.0),  # nu(e)
    13: (0.10565837550000001, 2.9959836e-19),  # mu-
    14: (0.0, 0.0),  # nu(mu)
    15: (1.7769300000000001, 2.2670000000000003e-12),  # tau-
    16: (0.0, 0.0),  # nu(tau)
    21: (0.0, 0.0),  # g
    22: (0.0, 0.0),  # gamma
    23: (91.1879, 2.4955000000000003),  # Z0
    24: (80.362, 2.14),  # W+
    25: (125.13000000000001, 0.003),  # H0
    2212: (0.9382720894300001, 0.0),  # p
}


def table_text() -> str:
    """This module's text made afresh from the installed `particle` package."""
    import particle
    from particle import Particle

    from .particles import SCALAR_ID, _TABLE

    rows = []
    for i in sorted({abs(r[1]) for r in _TABLE if r[1] != SCALAR_ID}):
        p = Particle.from_pdgid(i)
        rows.append(f"    {i}: ({(p.mass or 0.0) * 1e-3!r}, {(p.width or 0.0) * 1e-3!r}),  # {p.name}")
    head, _, rest = open(__file__, encoding="utf-8").read().partition("MASS_WIDTH: dict")
    head = head.replace(f'PARTICLE_VERSION = "{PARTICLE_VERSION}"', f'PARTICLE_VERSION = "{particle.__version__}"')
    tail = rest[rest.index("\n}\n") + 3:]
    return head + "MASS_WIDTH: dict[int, tuple[float, float]] = {\n" + "\n".join(rows) + "\n}\n" + tail


if __name__ == "__main__":
    from pathlib import Path

    Path(__file__).write_text(table_text(), encoding="utf-8")
