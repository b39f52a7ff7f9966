"""Our particle table against the PDG data of the `particle` package."""

from __future__ import annotations

import pytest

from gen.particles import SCALAR_ID, known_names, species

particle = pytest.importorskip("particle")


@pytest.mark.parametrize("name", [n for n in known_names() if n != "phi"])
def test_charge_and_mass_agree_with_the_pdg_tables(name):
    sp = species(name)
    ref = particle.Particle.from_pdgid(sp.pdg)
    assert sp.charge == pytest.approx(float(ref.charge))
    assert sp.mass == pytest.approx((ref.mass or 0.0) * 1e-3)  # MeV -> GeV
    # the quark colour and the spin follow the PDG numbering (common practice, no source)
    assert (abs(sp.colour) == 3) == (1 <= abs(sp.pdg) <= 6)
    assert sp.spin2 == (1 if abs(sp.pdg) <= 16 else (0 if sp.pdg == 25 else 2))


def test_the_scalar_id_is_not_a_pdg_particle():
    with pytest.raises(Exception):
        particle.Particle.from_pdgid(SCALAR_ID)
