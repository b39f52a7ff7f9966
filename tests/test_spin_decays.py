"""Decays with spin correlations (production and decays as one amplitude, narrow width): decay
angles against their analytic distributions, the cross-section against sigma x BR, the records
and the card's errors."""

from __future__ import annotations

import math

import numpy as np
import pytest

from gen.card import parse_card
from gen.errors import CardError
from gen.physics.kinematics import to_rest_frame
from gen.processes import build_process

from conftest import card, integrate, within

ZH = """[decays.Z]
into = ["mu-", "mu+"]
[decays.H]
into = ["b", "bbar"]
"""

TT_DILEPTON = """[decays.t]
into = ["b", "W+"]
[decays.tbar]
into = ["bbar", "W-"]
[decays."W+"]
into = ["e+", "nu_e"]
[decays."W-"]
into = ["mu-", "nu_mubar"]
"""


def _card(outgoing, decays, sqrt_s, spins=None, model="standard"):
    text = card(model, ["e-", "e+"], outgoing, f"sqrt_s = {sqrt_s}", decays)
    if spins:
        text = text.replace("[collider]", f'decay_spins = "{spins}"\n[collider]')
    return text


def _flat_sample(text, n, seed=1):
    """Weights and laboratory momenta (every particle of the record) of n uniform points; the
    decay trees of these cards have no peaks left (the resonances are on shell)."""
    proc = build_process(parse_card(text, "spins.toml"))
    rng = np.random.default_rng(seed)
    x = rng.random((n, proc.ndim))
    w = proc.weights(x)
    keep = w > 0
    return w[keep], proc.events(x[keep], rng).momenta


def _weighted_mean(w, f):
    """The weighted mean of f and its error (the ratio estimator's)."""
    mean = (w * f).sum() / w.sum()
    err = math.sqrt(((w * (f - mean)) ** 2).sum()) / w.sum()
    return mean, err


def _cos(a, b):
    return (a[:, 1:] * b[:, 1:]).sum(1) / np.linalg.norm(a[:, 1:], axis=1) / np.linalg.norm(b[:, 1:], axis=1)


@pytest.mark.parametrize("spins", ["correlated", "isotropic"])
def test_z_helicity_fraction_in_higgs_strahlung(spins):
    """e+e- -> Z H -> mu- mu+ b bbar at 240 GeV: the mu- angle theta* in the Z rest frame against the
    Z direction has <cos^2> = 2/5 - f_L/5, with the longitudinal fraction f_L = E_Z^2 / (E_Z^2 + 2 m_Z^2)
    (the g^{mu nu} Z Z H vertex after the e+e- current's polarization sum; Barger, Cheung, Djouadi,
    Kniehl & Zerwas, Phys. Rev. D 49 (1994) 79, from memory). Isotropic decays give f_L = 1/3."""
    w, p = _flat_sample(_card(["Z", "H"], ZH, 240.0, spins), 40000)
    z, mu = p[:, 2], p[:, 4]
    c = _cos(to_rest_frame(mu, z), z)
    mean, err = _weighted_mean(w, c * c)
    f_l, f_err = 2.0 - 5.0 * mean, 5.0 * err
    m_z, m_h, rs = 91.1876, 125.09, 240.0
    e_z = (rs * rs + m_z**2 - m_h**2) / (2 * rs)
    ref = e_z**2 / (e_z**2 + 2 * m_z**2) if spins == "correlated" else 1.0 / 3.0
    assert abs(f_l - ref) < 4 * f_err, (f_l, f_err, ref)
    assert f_err < 0.015  # enough to tell 0.398 from 1/3


@pytest.mark.parametrize("spins", ["correlated", "isotropic"])
def test_top_pair_spin_correlation_in_the_dilepton_channel(spins):
    """e+e- -> t tbar -> b e+ nu bbar mu- nubar at 500 GeV: the angle phi between e+ (in the t rest frame)
    and mu- (in the tbar rest frame) follows (1/2)(1 - D cos phi) with D = -Tr C / 3 (Bernreuther,
    Brandenburg, Si & Uwer, Nucl. Phys. B 690 (2004) 81) and charged-lepton analysing power 1 at leading
    order (Jezabek & Kuehn, Nucl. Phys. B 320 (1989) 20). Derived: the vector and axial currents of
    gamma*/Z make t tbar in spin-triplet states only (3S1, 3D1, 3P1), so <sigma_t . sigma_tbar> = 1 and
    D = 1/3: <cos phi> = -1/9 at any energy. Isotropic decays give 0."""
    w, p = _flat_sample(_card(["t", "tbar"], TT_DILEPTON, 500.0, spins), 40000)
    cphi = _cos(to_rest_frame(p[:, 8], p[:, 2]), to_rest_frame(p[:, 10], p[:, 3]))
    mean, err = _weighted_mean(w, cphi)
    ref = -1.0 / 9.0 if spins == "correlated" else 0.0
    assert abs(mean - ref) < 4 * err and err < 0.025, (mean, err, ref)


def test_correlated_decays_keep_sigma_times_the_branching_ratios():
    """Summed over the decay angles, the helicity interference vanishes: sigma equals the isotropic
    sigma(production) x BR within errors (the narrow-width factorization, common practice, no source)."""
    _, corr = integrate(_card(["Z", "H"], ZH, 240.0, "correlated"), warmup=3, iterations=5, points=4000)
    _, iso = integrate(_card(["Z", "H"], ZH, 240.0, "isotropic"), warmup=3, iterations=5, points=4000)
    assert within(corr.value, math.hypot(corr.error, iso.error), iso.value, k=4), (corr, iso)
    assert corr.error < 0.003 * corr.value


def test_records_of_correlated_decays():
    """Intermediate particles are the sums of their products, momentum is conserved, and H -> b bbar
    carries one colour line from b to bbar (common practice, no source)."""
    proc = build_process(parse_card(_card(["Z", "H"], ZH, 240.0), "zh.toml"))
    layout = proc.particle_layout()
    assert layout.roles == ("incoming", "incoming", "intermediate", "intermediate") + ("outgoing",) * 4
    assert list(layout.parent_first[4:]) == [2, 2, 3, 3]
    rng = np.random.default_rng(3)
    x = rng.random((200, proc.ndim))
    ev = proc.events(x[proc.weights(x) > 0], rng)
    p = ev.momenta
    np.testing.assert_allclose(p[:, 2], p[:, 4] + p[:, 5], atol=1e-9)
    np.testing.assert_allclose(p[:, 3], p[:, 6] + p[:, 7], atol=1e-9)
    np.testing.assert_allclose(p[:, 0] + p[:, 1], p[:, 4:].sum(1), atol=1e-9)
    assert np.all(ev.colour[:, 6] > 0) and np.all(ev.colour[:, 6] == ev.anticolour[:, 7])
    m_z = np.sqrt(p[:, 2, 0] ** 2 - (p[:, 2, 1:] ** 2).sum(1))
    np.testing.assert_allclose(m_z, proc.steps[0].mass, rtol=1e-9)  # on the mass shell
    assert abs(proc.steps[0].mass - 91.19) < 0.01


@pytest.mark.parametrize("decays,spins,model,key", [
    (ZH, "correlated", "electroweak", "process.decay_spins"),
    ("", "isotropic", "standard", "process.decay_spins"),
    (ZH.replace('into = ["mu-", "mu+"]', 'into = ["mu-", "mu+"]\nwindow = 5'), "correlated", "standard", "decays.Z.window"),
])
def test_decay_spin_errors_name_the_key(decays, spins, model, key):
    """Correlated decays with a hand-coded model, decay_spins with no decays, and a mass window that
    on-shell decays would ignore: each refused naming its key."""
    with pytest.raises(CardError) as err:
        parse_card(_card(["Z", "H"], decays, 240.0, spins, model), "bad.toml")
    assert f": {key}:" in str(err.value)
