"""Total cross-sections from the vegas integration against published formulas.

Monte-Carlo tolerances are k standard deviations of the reported vegas error (k = 5 unless said),
so a wrong factor of 2, a missing symmetry factor or a wrong propagator fails.
"""

from __future__ import annotations

import math

import pytest
from scipy.integrate import quad

from conftest import card, integrate, within
import references as ref

QED_MUMU = dict(model="qed", incoming=("e-", "e+"), outgoing=("mu-", "mu+"))


def _point_qed(s, alpha):
    """4 pi alpha^2 / (3 s) in pb (PDG cross-section formulae review)."""
    return 4.0 * math.pi * alpha**2 / (3.0 * s) * ref.HBARC2_PB


@pytest.mark.parametrize("rs", [0.25, 1.0, 10.58, 100.0])
def test_mumu_total_with_threshold_factor(rs):
    """sigma = 4 pi alpha^2/(3s) beta (3 - beta^2)/2 (PDG review; massive factor Peskin & Schroeder eq. 5.14)."""
    proc, xs = integrate(card(**QED_MUMU, collider=f"sqrt_s = {rs}"))
    m = proc.masses[2]
    beta = math.sqrt(1.0 - 4.0 * m * m / (rs * rs))
    expect = _point_qed(rs * rs, proc.params["alpha"]) * beta * (3.0 - beta**2) / 2.0
    # the formula neglects the electron mass: corrections of order m_e^2/s (4e-6 at 0.25 GeV)
    me2_s = (proc.masses[0] / rs) ** 2
    assert within(xs.value, xs.error, expect, rel_floor=5 * me2_s), (xs.value, xs.error, expect)


def test_mumu_matches_the_pdg_rounded_86_8_nb():
    """PDG: sigma = 86.8 nb / s[GeV^2]; at sqrt(s) = 30 GeV the mass factor is 1 - 2e-5, so 1e-3 covers the rounding."""
    _, xs = integrate(card(**QED_MUMU, collider="sqrt_s = 30.0"))
    assert xs.value / 1e3 == pytest.approx(ref.PDG_MUMU_NB_GEV2 / 900.0, rel=1e-3)


def test_tau_pair_near_threshold():
    """The beta(3 - beta^2)/2 factor matters most just above threshold (PDG review; Peskin & Schroeder eq. 5.14)."""
    proc, xs = integrate(card("qed", ("e-", "e+"), ("tau-", "tau+"), "sqrt_s = 3.6"))
    m = proc.masses[2]
    beta = math.sqrt(1.0 - 4.0 * m * m / 3.6**2)
    expect = _point_qed(3.6**2, proc.params["alpha"]) * beta * (3.0 - beta**2) / 2.0
    assert beta < 0.3
    assert within(xs.value, xs.error, expect)


def test_asymmetric_and_fixed_target_beams_give_the_invariant_cross_section():
    """sigma is Lorentz invariant (common practice, no source): 7 x 4 GeV beams equal sqrt(s) = 2 sqrt(28) GeV."""
    rs = 2.0 * math.sqrt(7.0 * 4.0)
    _, sym = integrate(card(**QED_MUMU, collider=f"sqrt_s = {rs}"))
    _, asym = integrate(card(**QED_MUMU, collider="beam_energies = [7.0, 4.0]"))
    assert within(asym.value, math.hypot(asym.error, sym.error), sym.value, rel_floor=1e-6)


@pytest.mark.parametrize("mev", [0.1, 0.511, 1.0, 10.0])
def test_compton_total_against_klein_nishina(mev):
    """Photon of energy k m_e on an electron at rest (fixed target) against the Klein-Nishina formula."""
    proc, xs = integrate(card("qed", ("gamma", "e-"), ("gamma", "e-"), f"beam_energy = {mev * 1e-3}"))
    me = proc.masses[1]
    alpha = proc.params["alpha"]
    r_e_fm = alpha * 0.1973269804 / me  # r_e = alpha hbar c / m_e, with the run's alpha and m_e
    expect = ref.klein_nishina(mev * 1e-3 / me, r_e_fm) * 1e-2 * ref.BARN_PB  # fm^2 -> barn -> pb
    assert within(xs.value, xs.error, expect, rel_floor=1e-9)
    # the closed form against a numerical integral of the differential form
    assert expect == pytest.approx(ref.klein_nishina_by_quadrature(mev * 1e-3 / me, r_e_fm) * 1e-2 * ref.BARN_PB,
                                   rel=1e-9, abs=0)


def test_compton_low_energy_limit_is_thomson():
    """At 1 eV the Klein-Nishina correction is -2k = -4e-6; compare with CODATA sigma_T (scipy.constants) at 1e-4."""
    _, xs = integrate(card("qed", ("gamma", "e-"), ("e-", "gamma"), "beam_energy = 1e-9"), iterations=4)
    assert xs.value / ref.BARN_PB == pytest.approx(ref.THOMSON_BARN, rel=1e-4)


def test_photon_fusion_against_breit_wheeler():
    for rs in (0.0011, 0.002, 0.01):
        proc, xs = integrate(card("qed", ("gamma", "gamma"), ("e-", "e+"), f"sqrt_s = {rs}"))
        me = proc.masses[2]
        beta = math.sqrt(1.0 - 4.0 * me * me / rs**2)
        r_e_fm = proc.params["alpha"] * 0.1973269804 / me
        expect = ref.breit_wheeler(beta, r_e_fm) * 1e-2 * ref.BARN_PB
        assert within(xs.value, xs.error, expect, rel_floor=1e-8), (rs, xs.value, expect)


def test_positron_annihilation_in_flight_against_dirac():
    """e+ beam on electrons at rest; the symmetry factor 1/2 of the two photons is part of this check."""
    for kinetic_mev in (0.1, 1.0, 10.0):
        proc, xs = integrate(card("qed", ("e+", "e-"), ("gamma", "gamma"),
                                  f"beam_energy = {0.00051099895069 + kinetic_mev * 1e-3}"))
        me = proc.masses[0]
        gamma = proc.beam1[0] / me
        r_e_fm = proc.params["alpha"] * 0.1973269804 / me
        expect = ref.dirac_annihilation(gamma, r_e_fm) * 1e-2 * ref.BARN_PB
        assert within(xs.value, xs.error, expect, rel_floor=1e-8), (kinetic_mev, xs.value, expect)


def _angular_integral(fn, rs, alpha, lo, hi, identical):
    val, _ = quad(lambda c: 2.0 * math.pi * fn(rs * rs, c, alpha), lo, hi, epsabs=0, epsrel=1e-12, limit=200)
    return val * ref.HBARC2_PB * (0.5 if identical else 1.0)


@pytest.mark.parametrize("theta", [(10.0, 170.0), (30.0, 150.0)])
def test_bhabha_within_angular_cuts(theta):
    rs = 10.0
    proc, xs = integrate(card("qed", ("e-", "e+"), ("e-", "e+"), f"sqrt_s = {rs}",
                              f"[cuts]\ntheta_min_deg = {theta[0]}\ntheta_max_deg = {theta[1]}"))
    c = math.cos(math.radians(theta[0]))
    expect = _angular_integral(ref.bhabha_dsigma_domega, rs, proc.params["alpha"], -c, c, False)
    # electron mass neglected in the reference: m^2/s ~ 3e-9
    assert within(xs.value, xs.error, expect, rel_floor=1e-7), (xs.value, xs.error, expect)


def test_moller_within_angular_cuts_includes_the_symmetry_factor():
    rs = 0.5
    proc, xs = integrate(card("qed", ("e-", "e-"), ("e-", "e-"), f"sqrt_s = {rs}",
                              "[cuts]\ntheta_min_deg = 20\ntheta_max_deg = 160"))
    c = math.cos(math.radians(20.0))
    expect = _angular_integral(ref.moller_dsigma_domega, rs, proc.params["alpha"], -c, c, True)
    # m_e^2/s ~ 1e-6 is neglected in the reference
    assert xs.value == pytest.approx(expect, rel=1e-5)
    assert not within(xs.value, xs.error, 2.0 * expect)


def test_scalar_quartic_total():
    """sigma = lambda^2 / (32 pi s) with the 1/2 for identical particles (Peskin & Schroeder sec. 4.6)."""
    for rs, lam in ((3.0, 1.0), (50.0, 2.5)):
        proc, xs = integrate(card("scalar", ("phi", "phi"), ("phi", "phi"), f"sqrt_s = {rs}",
                                  f"[parameters]\nquartic = {lam}\nmass = 1.0"))
        expect = lam**2 / (32.0 * math.pi * rs * rs) * ref.HBARC2_PB
        assert xs.value == pytest.approx(expect, rel=1e-10)


def test_scalar_with_cubic_coupling_against_a_numerical_integral():
    """M = -lambda - g^2 sum_x 1/(x - m^2) (Srednicki, QFT (2007), ch. 10, from memory), integrated with scipy."""
    rs, m, lam, g = 6.0, 1.0, 0.5, 4.0
    proc, xs = integrate(card("scalar", ("phi", "phi"), ("phi", "phi"), f"sqrt_s = {rs}",
                              f"[parameters]\nquartic = {lam}\ncubic = {g}\nmass = {m}"))
    s = rs * rs
    p2 = s / 4.0 - m * m

    def dsig(c):
        t = -2.0 * p2 * (1.0 - c)
        u = -2.0 * p2 * (1.0 + c)
        amp = -lam - g * g * (1.0 / (s - m * m) + 1.0 / (t - m * m) + 1.0 / (u - m * m))
        return amp * amp / (32.0 * math.pi * s)  # dsigma/dcos for p_f = p_i

    expect = 0.5 * quad(dsig, -1.0, 1.0, epsrel=1e-12)[0] * ref.HBARC2_PB
    assert within(xs.value, xs.error, expect, rel_floor=1e-8)


@pytest.mark.parametrize("flavour,rs", [("mu-", 35.0), ("mu-", 91.1879), ("mu-", 200.0), ("d", 60.0), ("b", 91.1879), ("u", 150.0)])
def test_electroweak_pair_against_the_textbook_gamma_z_formula(flavour, rs):
    from gen.physics.particles import species

    anti = {"mu-": "mu+"}.get(flavour, flavour + "bar")
    proc, xs = integrate(card("electroweak", ("e-", "e+"), (flavour, anti), f"sqrt_s = {rs}"))
    sp = species(flavour)
    par = proc.params
    m = proc.masses[2]
    beta = math.sqrt(1.0 - 4.0 * m * m / (rs * rs))
    expect = ref.ew_fermion_pair_sigma(rs * rs, sp.charge, sp.t3, 3.0 if sp.is_quark else 1.0, par["alpha"],
                                       par["sw2"], par["m_Z"], par["width_Z"], beta) * ref.HBARC2_PB
    # the electron mass is neglected in both: corrections of order m_e^2/s < 1e-9
    assert within(xs.value, xs.error, expect, rel_floor=1e-8), (xs.value, expect)


def test_z_peak_against_the_breit_wigner_relation():
    """Peak sigma(mu mu) = 12 pi Gamma_ee Gamma_mumu / (m_Z^2 Gamma_Z^2) (tree-level Breit-Wigner relation).

    Tight: with our tree-level widths (PDG tree-level formula) plus the photon term, which at
    s = m_Z^2 does not interfere. Loose (2%): with the PDG partial widths, since the tree-level
    Gamma_ll in the fermi scheme is 0.7% below the measured one (1.4% squared) and the photon adds 0.5%.
    """
    proc, xs = integrate(card("electroweak", ("e-", "e+"), ("mu-", "mu+"), "sqrt_s = 91.1879"))
    par = proc.params
    mz, gz = par["m_Z"], par["width_Z"]
    gll = ref.z_width_ff(par["g_fermi"], mz, -1.0, -0.5, par["sw2"])
    peak = 12.0 * math.pi * gll * gll / (mz * mz * gz * gz) * ref.HBARC2_PB
    photon = _point_qed(mz * mz, par["alpha"])
    # the muon mass changes the peak by O(m^2/s) ~ 1e-6: tolerance 1e-5
    assert xs.value == pytest.approx(peak + photon, rel=1e-5)
    pdg_peak = 12.0 * math.pi * ref.GAMMA_LL_PDG**2 / (ref.M_Z_PDG**2 * ref.GAMMA_Z_PDG**2) * ref.HBARC2_PB
    # the same from the LEP hadronic pole cross-section: sigma0_mumu = sigma0_had / R_l
    assert pdg_peak / 1e3 == pytest.approx(ref.SIGMA0_HAD_NB / ref.R_L_PDG, rel=2e-3)
    assert xs.value == pytest.approx(pdg_peak, rel=0.02)


def test_higgs_strahlung_against_its_tree_level_formula():
    for rs in (240.0, 250.0, 500.0):
        proc, xs = integrate(card("electroweak", ("e-", "e+"), ("Z", "H"), f"sqrt_s = {rs}"))
        par = proc.params
        expect = ref.zh_sigma(rs * rs, par["g_fermi"], par["m_Z"], par["m_H"], par["sw2"]) * ref.HBARC2_PB
        # the reference neglects Gamma_Z: (m_Z Gamma_Z)^2/(s - m_Z^2)^2 < 3e-5 here
        assert xs.value == pytest.approx(expect, rel=1e-4), (rs, xs.value, expect)
