"""Every parameter path exercised against an outside value: the three electroweak input schemes,
the Cabibbo angle, fixed and running alpha_s, each scale choice, and the cut kinds that have an
exact geometric equivalent.

Outside references: CODATA G_F and alpha(0) from `scipy.constants`; the PDG masses of W and Z from
the `particle` package; alpha(m_Z)^-1 = 127.951 and sin^2 theta_eff = 0.23153 (PDG review
"Electroweak model and constraints on new physics", 2024; from memory); the fermi-scheme relation
alpha_Gmu = sqrt2 G_F m_W^2 (1 - m_W^2/m_Z^2) / pi (same review); the two-generation quark mixing
|V_ud| = |V_cs| = cos theta_C, |V_us| = |V_cd| = sin theta_C (Cabibbo, PRL 10 (1963) 531); the
one-loop running alpha_s(mu) = alpha_s(m_Z) / (1 + b0 alpha_s(m_Z) ln(mu^2/m_Z^2)), b0 = (33 - 2 n_f)/(12 pi)
(PDG review "Quantum chromodynamics", eq. 9.5 at one loop; from memory); scale definitions and the
pseudorapidity eta = -ln tan(theta/2) are common practice, no source.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.constants as sc
from particle import Particle

from gen.card import parse_card
from gen.jobs.run import run
from gen.records.store import read_table

from conftest import card, integrate

G_F = sc.physical_constants["Fermi coupling constant"][0]
M_W = Particle.from_pdgid(24).mass / 1e3
M_Z = Particle.from_pdgid(23).mass / 1e3
EE = (("e-", "e+"), ("mu-", "mu+"))


def _params(extra: str) -> dict:
    text = card("electroweak", *EE, "sqrt_s = 91.0", f"[parameters]\n{extra}\n[cuts]\ntheta_min_deg = 10\n"
                "theta_max_deg = 170")
    return parse_card(text, "c.toml").resolved.parameters


def test_the_fermi_scheme_derives_alpha_from_g_fermi_and_the_masses():
    par = _params('scheme = "fermi"')
    sw2 = 1 - (M_W / M_Z) ** 2
    assert par["sw2"] == pytest.approx(sw2, rel=1e-12)
    assert par["alpha"] == pytest.approx(math.sqrt(2) * G_F * M_W**2 * sw2 / math.pi, rel=1e-9)
    assert 1 / par["alpha"] == pytest.approx(132.2, abs=0.3)  # the familiar 1/alpha_Gmu (common practice)


def test_the_thomson_scheme_uses_alpha_zero():
    par = _params('scheme = "thomson"')
    assert par["alpha"] == pytest.approx(sc.fine_structure, rel=1e-12)
    assert par["sw2"] == pytest.approx(1 - (M_W / M_Z) ** 2, rel=1e-12)


def test_the_zpole_scheme_uses_alpha_at_the_z_mass_and_the_effective_angle():
    par = _params('scheme = "zpole"')
    assert 1 / par["alpha"] == pytest.approx(127.951, abs=1e-9)
    assert par["sw2"] == pytest.approx(0.23153, abs=1e-12)
    par = _params('scheme = "zpole"\nsw2 = 0.2312\nalpha = 0.0078')
    assert (par["sw2"], par["alpha"]) == (0.2312, 0.0078)


@pytest.mark.parametrize("theta", [0.0, 0.227, 0.5])
def test_the_cabibbo_angle_sets_the_two_generation_mixing(theta):
    text = card("electroweak", ("p", "pbar"), ("l+", "nu"), "sqrt_s = 1960.0",
                f"[parameters]\ncabibbo_angle = {theta}\n[cuts]\nmass_min = 50.0\nmass_max = 110.0")
    par = parse_card(text, "c.toml").resolved.parameters
    assert par["ckm2_ud"] == pytest.approx(math.cos(theta) ** 2, abs=1e-15)
    assert par["ckm2_cs"] == pytest.approx(math.cos(theta) ** 2, abs=1e-15)
    assert par["ckm2_us"] == pytest.approx(math.sin(theta) ** 2, abs=1e-15)
    assert par["ckm2_cd"] == pytest.approx(math.sin(theta) ** 2, abs=1e-15)


# --- scales and alpha_s in the events --------------------------------------------------------------

def _hadron_events(tmp_path, model, outgoing, extra):
    text = card(model, ("p", "p"), outgoing, "sqrt_s = 13600.0",
                extra + "\n[integration]\nwarmup_iterations = 2\niterations = 3\npoints_per_iteration = 4000",
                "events = 0\nweighted_events = 3000\nseed = 4")
    run(parse_card(text, "c.toml"), tmp_path / "out")
    table = read_table(tmp_path / "out" / "weighted.parquet")
    parts = table.column("particles").combine_chunks().flatten()
    p = np.stack([parts.field(c).to_numpy() for c in ("e", "px", "py", "pz")], -1).reshape(table.num_rows, -1, 4)
    return table, p


def _pt(p, i):
    return np.hypot(p[:, i, 1], p[:, i, 2])


@pytest.mark.parametrize("choice, factor", [("pt", 1.0), ("sqrt_shat", 1.0), ("half_ht", 1.0), ("pt", 2.0),
                                            (150.0, 0.5)])
def test_each_scale_choice_against_the_event_momenta(choice, factor, tmp_path):
    value = f'"{choice}"' if isinstance(choice, str) else choice
    table, p = _hadron_events(tmp_path, "qcd", ("t", "tbar"),
                              f"[scales]\nrenormalization = {value}\nfactorization = {value}\nfactor = {factor}")
    x1, x2 = table.column("x1").to_numpy(), table.column("x2").to_numpy()
    m_t = Particle.from_pdgid(6).mass / 1e3
    if choice == "pt":
        mu = _pt(p, 2)
    elif choice == "sqrt_shat":
        mu = np.sqrt(x1 * x2) * 13600.0
    elif choice == "half_ht":
        mu = 0.5 * (np.sqrt(m_t**2 + _pt(p, 2) ** 2) + np.sqrt(m_t**2 + _pt(p, 3) ** 2))
    else:
        mu = np.full(table.num_rows, choice)
    np.testing.assert_allclose(table.column("scale").to_numpy(), factor * mu, rtol=1e-6)
    np.testing.assert_allclose(table.column("factorization_scale").to_numpy(), factor * mu, rtol=1e-6)


def test_one_loop_alpha_s_in_the_events_against_its_closed_form(tmp_path):
    """Between the b and t thresholds n_f = 5 and the one-loop running has a closed form."""
    a_mz = 0.125
    table, _ = _hadron_events(tmp_path, "qcd", ("t", "tbar"),
                              f"[partons]\nalpha_s = \"one_loop\"\nalpha_s_mz = {a_mz}\n"
                              "[scales]\nrenormalization = 120.0")
    b0 = (33 - 2 * 5) / (12 * math.pi)
    expect = a_mz / (1 + b0 * a_mz * math.log(120.0**2 / 91.1876**2))  # m_Z as the set's reference (LHAPDF default)
    np.testing.assert_allclose(table.column("alpha_s").to_numpy(), expect, rtol=1e-6)


# --- cuts with an exact geometric equivalent ---------------------------------------------------------

def _sigma(cuts: str):
    _, xs = integrate(card("electroweak", *EE, "sqrt_s = 91.1879", "[cuts]\n" + cuts))
    return xs


def test_a_pseudorapidity_cut_equals_the_polar_angle_cut_it_describes():
    eta = 1.5
    theta = math.degrees(2 * math.atan(math.exp(-eta)))
    a = _sigma(f"eta_max = {eta}")
    b = _sigma(f"theta_min_deg = {theta}\ntheta_max_deg = {180 - theta}")
    assert abs(a.value - b.value) < 5 * math.hypot(a.error, b.error)
    assert b.value < 0.9 * _sigma("theta_min_deg = 1\ntheta_max_deg = 179").value  # the cut bites


def test_a_transverse_momentum_cut_equals_the_polar_angle_cut_it_describes():
    m_mu = Particle.from_pdgid(13).mass / 1e3
    p = math.sqrt(91.1879**2 / 4 - m_mu**2)
    pt_min = 30.0
    theta = math.degrees(math.asin(pt_min / p))
    a = _sigma(f"pt_min = {pt_min}")
    b = _sigma(f"theta_min_deg = {theta}\ntheta_max_deg = {180 - theta}")
    assert abs(a.value - b.value) < 5 * math.hypot(a.error, b.error)


@pytest.mark.parametrize("value, codata", [("ALPHA_0", "fine-structure constant"),
                                           ("G_FERMI", "Fermi coupling constant"),
                                           ("HBAR_EV_S", "reduced Planck constant in eV s")])
def test_the_written_codata_values_against_scipy_constants(value, codata):
    """gen writes its CODATA values out (scipy.constants costs start-up); they must be the ones
    scipy.constants holds, within the CODATA 2018 -> 2022 change of alpha (7e-10)."""
    from gen.physics import constants

    assert getattr(constants, value) == pytest.approx(sc.physical_constants[codata][0], rel=1e-9, abs=0)
