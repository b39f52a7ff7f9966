"""Card validation: every class of bad card gives one clear error naming the file and key path."""

from __future__ import annotations

import pytest

from gen.card import load_card, parse_card
from gen.errors import CardError
from gen.processes import build_process

from conftest import card

GOOD = card("qed", ("e-", "e+"), ("mu-", "mu+"), "sqrt_s = 10.0")


def _error(text: str, build: bool = False) -> str:
    with pytest.raises(CardError) as info:
        cfg = parse_card(text, "bad.toml")
        if build:
            build_process(cfg)
    return str(info.value)


def test_a_good_card_parses():
    cfg = parse_card(GOOD, "good.toml")
    assert cfg.model == "qed" and [p.pdg for p in cfg.outgoing] == [13, -13]
    assert cfg.integration["iterations"] == 10  # defaults filled in


def test_unknown_key_suggests_the_closest():
    msg = _error(GOOD.replace("sqrt_s", "sqrts"))
    assert msg.startswith("bad.toml: collider.sqrts: unknown key") and "'sqrt_s'" in msg


def test_unknown_section_suggests_the_closest():
    msg = _error(GOOD + "\n[cut]\npt_min = 1.0\n")
    assert "bad.toml: cut: unknown section" in msg and "'cuts'" in msg


def test_wrong_type():
    msg = _error(GOOD.replace("sqrt_s = 10.0", 'sqrt_s = "ten"'))
    assert "bad.toml: collider.sqrt_s: expected a number, found 'ten'" in msg


def test_value_out_of_range():
    msg = _error(GOOD + "\n[cuts]\ntheta_max_deg = 200\n")
    assert "bad.toml: cuts.theta_max_deg: 200 is above the largest accepted value 180 deg" in msg
    msg = _error(GOOD.replace("[sampling]", "[integration]\niterations = 0\n[sampling]"))
    assert "integration.iterations: 0 is below the smallest accepted value 1" in msg


def test_unknown_particle_suggests_close_names():
    msg = _error(GOOD.replace('"mu-"', '"muon-"'))
    assert "bad.toml: process.outgoing[0]: unknown particle 'muon-'" in msg and "'mu-'" in msg


def test_pdg_ids_are_accepted():
    cfg = parse_card(GOOD.replace('["mu-", "mu+"]', "[13, -13]"), "ids.toml")
    assert [p.name for p in cfg.outgoing] == ["mu-", "mu+"]


def test_process_not_in_the_model_lists_what_is():
    msg = _error(card("qed", ("e-", "e+"), ("b", "bbar"), "sqrt_s = 10.0"))
    assert "bad.toml: process: model 'qed' has no process e- e+ -> b bbar" in msg
    assert "e- e+ -> mu- mu+" in msg and "gamma gamma -> e- e+" in msg


def test_unknown_model_lists_the_models():
    msg = _error(GOOD.replace('"qed"', '"qcdd"'))
    assert "process.model: 'qcdd' is not one of 'scalar', 'qed', 'electroweak', 'qcd'" in msg


def test_energy_below_threshold():
    msg = _error(card("qed", ("e-", "e+"), ("tau-", "tau+"), "sqrt_s = 3.0"), build=True)
    assert "bad.toml: collider.sqrt_s: sqrt(s) = 3 GeV is below the threshold 3.55" in msg


def test_beam_energy_below_the_beam_mass():
    msg = _error(card("qed", ("mu-", "e-"), ("mu-", "e-"), "beam_energy = 0.05",
                      "[cuts]\ntheta_min_deg = 5\ntheta_max_deg = 175"), build=True)
    assert "collider.beam_energy: beam energy 0.05 GeV is below the particle mass" in msg


def test_collider_needs_exactly_one_energy_key():
    msg = _error(GOOD.replace("sqrt_s = 10.0", "sqrt_s = 10.0\nbeam_energy = 5.0"))
    assert "bad.toml: collider: give exactly one of sqrt_s, beam_energies, beam_energy" in msg


def test_pole_process_without_angular_cut():
    msg = _error(card("qed", ("e-", "e+"), ("e-", "e+"), "sqrt_s = 10.0"), build=True)
    assert "bad.toml: cuts.theta_min_deg:" in msg and "forward pole" in msg


def test_unknown_model_parameter_and_bad_scheme():
    msg = _error(GOOD.replace("[sampling]", "[parameters]\nalfa = 0.01\n[sampling]"))
    assert "bad.toml: parameters.alfa: unknown parameter of model 'qed'" in msg and "'alpha'" in msg
    ew = card("electroweak", ("e-", "e+"), ("mu-", "mu+"), "sqrt_s = 91.0", '[parameters]\nscheme = "fermii"')
    assert "parameters.scheme: 'fermii' is not one of 'fermi', 'thomson', 'zpole'" in _error(ew)


def test_cut_particles_must_be_outgoing():
    msg = _error(GOOD + '\n[cuts]\nparticles = ["tau-"]\n')
    assert "bad.toml: cuts.particles[0]: 'tau-' is not an outgoing particle" in msg


def test_cuts_that_reject_everything():
    msg = _error(GOOD + "\n[cuts]\nenergy_min = 6.0\n", build=True)
    assert "bad.toml: cuts: the cuts reject every event" in msg


def test_missing_card_file_and_bad_toml(tmp_path):
    with pytest.raises(CardError, match="no such card file"):
        load_card(tmp_path / "none.toml")
    bad = tmp_path / "broken.toml"
    bad.write_text("[process\nmodel = 1")
    with pytest.raises(CardError, match="broken.toml: not valid TOML"):
        load_card(bad)


def test_mass_override_of_a_model_governed_particle_is_refused():
    ew = card("electroweak", ("e-", "e+"), ("Z", "H"), "sqrt_s = 250.0", "[parameters.masses]\nZ = 90.0")
    msg = _error(ew, build=True)
    assert "parameters.masses.Z: the electroweak model sets this mass from its parameters" in msg
