"""e+e- -> q qbar g: |M|^2 against the textbook x1, x2 distribution, the three-jet rate within cuts
against a numerical integral, and the events (conservation, colour flow)."""

from __future__ import annotations

import math

import numpy as np
import pytest
import sympy
from scipy.integrate import dblquad

import gen
from gen.card import parse_card
from gen.physics.matrix.qcd import make_three_jet

from conftest import card, integrate

hm = pytest.importorskip("equation_database.isbn_9780471887416")  # Halzen & Martin (1984)
dgt = pytest.importorskip("equation_database.doi_10_1103_PhysRevD_16_3251")  # DeGrand, Ng & Tye (1977)

ALPHA, ALPHA_S = 1 / 137.035999, 0.118
PAR = {"alpha": ALPHA, "alpha_s": ALPHA_S, "m1": 0.0, "m2": 0.0}


def _dgt_density():
    """(1/sigma_pt) dsigma/dx1 dx2 of DeGrand, Ng & Tye eq. 2.9, as a numpy function."""
    rhs = dgt.equation_2_9.rhs
    return sympy.lambdify((dgt.x_1, dgt.x_2, dgt.alpha_C), rhs, "numpy")


def _events_at(x1, x2, rs, rng, n):
    """Massless q qbar g momenta at energy fractions x1 (q), x2 (qbar), with n random orientations."""
    e = np.array([x1, x2, 2 - x1 - x2]) * rs / 2
    # angle between q and qbar from momentum balance
    c12 = (e[2] ** 2 - e[0] ** 2 - e[1] ** 2) / (2 * e[0] * e[1])
    s12 = math.sqrt(1 - c12 * c12)
    base = np.array([[e[0], 0, 0, e[0]], [e[1], e[1] * s12, 0, e[1] * c12]])
    base = np.vstack([base, [e[2], *(-(base[0, 1:] + base[1, 1:]))]])
    # random rotations (uniform on SO(3) via QR of Gaussian matrices)
    q, r = np.linalg.qr(rng.normal(size=(n, 3, 3)))
    q = q * np.sign(np.diagonal(r, axis1=1, axis2=2))[:, None, :]
    out = np.empty((n, 5, 4))
    out[:, 0] = [rs / 2, 0, 0, rs / 2]
    out[:, 1] = [rs / 2, 0, 0, -rs / 2]
    out[:, 2:, 0] = base[:, 0]
    out[:, 2:, 1:] = np.einsum("nij,kj->nki", q, base[:, 1:])
    return out


def test_orientation_average_matches_halzen_martin_11_35_and_degrand():
    """Averaged over the beam direction, (1/2s) |M|^2 dPhi_3 with dPhi_3 = s/(128 pi^3) dx1 dx2 must
    equal sigma_0 (2 alpha_s/3 pi)(x1^2 + x2^2)/((1 - x1)(1 - x2)), sigma_0 = 4 pi alpha^2 e_q^2 / s
    summed over colours (DeGrand, Ng & Tye eq. 2.8-2.9); HM eq. 11.35 is the same shape."""
    rng = np.random.default_rng(3)
    rs = 30.0
    s = rs * rs
    me = make_three_jet("u")
    shape = sympy.lambdify((hm.x_q, hm.x_qbar, hm.N), hm.equation_11_35, "numpy")
    dens = _dgt_density()
    sigma_pt = 4 * math.pi * ALPHA**2 * (2 / 3) ** 2 / s  # eq. 2.8 for one flavour (colours summed)
    ratios = []
    for x1, x2 in ((0.6, 0.7), (0.9, 0.5), (0.8, 0.85), (0.55, 0.95)):
        p = _events_at(x1, x2, rs, rng, 200000)
        got = me(p, PAR).mean() / (2 * s) * s / (128 * math.pi**3)
        # normalization and shape against DeGrand, Ng & Tye, to the Monte-Carlo precision of the average
        assert got == pytest.approx(sigma_pt * dens(x1, x2, ALPHA_S), rel=5e-3)
        ratios.append(got / shape(x1, x2, 1.0))
    # the shape alone against Halzen & Martin eq. 11.35 (its N left free): a constant ratio
    assert np.ptp(ratios) / np.mean(ratios) < 1e-2


@pytest.mark.parametrize("y", [0.05, 0.1])
def test_three_jet_rate_within_cuts_against_a_numerical_integral(y):
    """Every parton pair above y s in invariant mass squared: x_k < 1 - y for each parton. The
    reference integrates DeGrand, Ng & Tye eq. 2.9 with scipy over x1 < 1 - y, x2 < 1 - y,
    x1 + x2 > 1 + y (up-quark mass effects are below 1e-8 at 30 GeV)."""
    rs = 30.0
    text = card("qcd", ("e-", "e+"), ("u", "ubar", "g"), f"sqrt_s = {rs}", f"[cuts]\npair_mass_min = {math.sqrt(y) * rs}")
    _, xs = integrate(text, warmup=6, iterations=8, points=40000)
    dens = _dgt_density()
    area = dblquad(lambda x2, x1: dens(x1, x2, ALPHA_S), 2 * y, 1 - y, lambda x1: 1 + y - x1, lambda x1: 1 - y,
                   epsrel=1e-10)[0]
    sigma_pt = 4 * math.pi * ALPHA**2 * (2 / 3) ** 2 / rs**2 * 0.3893793721e9
    expect = sigma_pt * area
    assert abs(xs.value - expect) < 5 * xs.error + 1e-6 * expect, (xs.value, xs.error, expect)


def test_three_jet_events(tmp_path):
    text = card("qcd", ("e+", "e-"), ("g", "ubar", "u"), "beam_energies = [20.0, 12.0]",
                "[cuts]\npair_mass_min = 5.0", "events = 5000\nweighted_events = 2000\nseed = 4")
    res = gen.run(parse_card(text, "jets.toml"), folder=tmp_path)
    for f in res.files:
        p = gen.read_momenta(f)
        assert p.shape[1] == 5
        total = p[:, 0] + p[:, 1] - p[:, 2:].sum(axis=1)
        assert np.abs(total).max() < 1e-9 * p[:, :2, 0].sum(axis=1).max()
        flat = gen.read_table(f).column("particles").combine_chunks().flatten()
        pdg = flat.field("pdg").to_numpy().reshape(-1, 5)[0]
        col = flat.field("colour").to_numpy().reshape(-1, 5)[0]
        acol = flat.field("anticolour").to_numpy().reshape(-1, 5)[0]
        assert pdg.tolist() == [-11, 11, 21, -2, 2]
        # colour conservation: every colour tag is matched by an anticolour tag among the outgoing partons
        assert sorted(c for c in col if c) == sorted(a for a in acol if a) and len(set(col) - {0}) == 2
        assert col[4] > 0 and acol[4] == 0  # the quark carries a colour
        assert acol[3] > 0 and col[3] == 0  # the antiquark an anticolour
        assert col[2] > 0 and acol[2] > 0 and col[2] != acol[2]  # the gluon both
        # every pair above the cut in the laboratory
        for i in range(2, 5):
            for j in range(i + 1, 5):
                q = p[:, i] + p[:, j]
                assert np.all(q[:, 0] ** 2 - (q[:, 1:] ** 2).sum(axis=1) >= 25.0 * (1 - 1e-9))


def test_soft_and_collinear_regions_need_a_cut():
    from gen.errors import CardError

    text = card("qcd", ("e-", "e+"), ("u", "ubar", "g"), "sqrt_s = 30.0")
    with pytest.raises(CardError, match="cuts.pair_mass_min"):
        gen.run(parse_card(text, "nocut.toml"))
