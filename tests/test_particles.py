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


@pytest.mark.parametrize("name, codata", [("e-", "electron mass energy equivalent in MeV"),
                                          ("mu-", "muon mass energy equivalent in MeV"),
                                          ("tau-", "tau mass energy equivalent"),
                                          ("p", "proton mass energy equivalent in MeV")])
def test_masses_against_codata(name, codata):
    """The masses gen reads from `particle` against CODATA (`scipy.constants`), a second source;
    within the two compilations' differences (1e-6 for e, mu, p; the tau's 1e-4 error)."""
    import scipy.constants as sc

    value, unit, _ = sc.physical_constants[codata]
    mev = value / sc.e / 1e6 if unit == "J" else value
    rel = 1e-4 if name == "tau-" else 1e-6
    assert species(name).mass * 1e3 == pytest.approx(mev, rel=rel)


def test_the_written_pdg_values_are_the_particle_packages():
    """gen/physics/pdg_values.py against the installed `particle` package (the PDG data), exactly:
    regenerate it with `python -m gen.physics.pdg_values` when this fails after an update."""
    from gen.physics import pdg_values

    for pdg, (mass, width) in pdg_values.MASS_WIDTH.items():
        ref = particle.Particle.from_pdgid(pdg)
        assert (mass, width) == ((ref.mass or 0.0) * 1e-3, (ref.width or 0.0) * 1e-3), pdg
    assert pdg_values.table_text() == open(pdg_values.__file__, encoding="utf-8").read()
