"""Our particle table against the PDG data of the `particle` package."""

from __future__ import annotations

import pytest

from gen.physics.particles import SCALAR_ID, known_names, species

particle = pytest.importorskip("particle")


@pytest.mark.parametrize("name", [n for n in known_names() if n != "phi" and not species(n).is_group])
def test_charge_and_mass_agree_with_the_pdg_tables(name):
    sp = species(name)
    ref = particle.Particle.from_pdgid(sp.pdg)
    assert sp.charge == pytest.approx(float(ref.charge))
    assert sp.mass == pytest.approx((ref.mass or 0.0) * 1e-3)  # MeV -> GeV
    assert sp.spin2 == round(2 * ref.J)
    # the quark colour follows the PDG numbering (common practice, no source)
    assert (abs(sp.colour) == 3) == (1 <= abs(sp.pdg) <= 6)


def test_groups_hold_particles_of_one_kind():
    """A group's members share charge and colour sign where the name says so (PDG data)."""
    for name in ("l-", "l+", "quark", "antiquark", "nu", "nubar"):
        charges = {float(particle.Particle.from_pdgid(species(m).pdg).charge) for m in species(name).members}
        assert len(charges) <= 2 if "quark" in name else len(charges) == 1, name
    assert set(species("jet").members) == set(species("quark").members) | set(species("antiquark").members) | {"g"}


def test_the_scalar_id_is_not_a_pdg_particle():
    with pytest.raises(Exception):
        particle.Particle.from_pdgid(SCALAR_ID)
