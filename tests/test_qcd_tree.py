"""The pure-QCD model of the automatic amplitudes (model file gen/physics/tree/qcd.toml, process.model
= "qcd-tree") against outside references, named at each check:

- Ellis, Stirling & Webber, QCD and Collider Physics (1996), Table 7.1: q qbar -> g g;
- Parke & Taylor, Phys. Rev. Lett. 56 (1986) 2459, and for a quark line the MHV form
  A(1_qbar^-, 2_q^+, 3^+, ..., i^-, ..., n^+) = i <1i>^3 <2i> / (<12><23>...<n1>) (and <1i><2i>^3
  for the other quark helicities) with the colour factor (T^a3 ... T^an)_{i2 j1}, Tr T^a T^b =
  delta^ab (Dixon, hep-ph/9601359, sec. 4; from memory): for n <= 5 every non-vanishing helicity
  configuration is MHV or its parity conjugate, so the helicity and colour sum of two quarks and
  three gluons follows from these amplitudes and the colour matrix of the orderings, which the
  reference below computes from explicit Gell-Mann matrices, apart from the library;
- gauge invariance of the gluon (Ward identity; Peskin & Schroeder (1995), sec. 16.3).
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest

from gen.physics.tree import build

GS2 = 4.0 * math.pi * 0.118  # the amplitudes' default alpha_s


# --- the reference: MHV amplitudes of a quark line and the colour sum, apart from the library ----

def _spinor(k):
    """lambda with k = lambda lambda~ for a massless k; a k of negative energy (a crossed incoming
    leg) gets i lambda(-k): a phase per leg, common to every ordering, which |M|^2 does not see."""
    sign = 1.0 if k[0] > 0 else -1.0
    e, x, y, z = (sign * float(c) for c in k)
    r = math.sqrt(e + z)
    lam = np.array([r, complex(x, y) / r])
    return lam if sign > 0 else 1j * lam


def _gell_mann() -> np.ndarray:
    """T^a = lambda^a / sqrt 2, so that Tr T^a T^b = delta^ab."""
    pairs = [(0, 1), (0, 2), (1, 2)]
    # the standard numbering: lambda 1, 2 on (0,1); 4, 5 on (0,2); 6, 7 on (1,2); 3 and 8 diagonal
    t = np.zeros((8, 3, 3), complex)
    for a, (i, j) in zip((0, 3, 5), pairs):
        t[a][i, j] = t[a][j, i] = 1.0
        t[a + 1][i, j], t[a + 1][j, i] = -1j, 1j
    t[2] = np.diag([1.0, -1.0, 0.0])
    t[7] = np.diag([1.0, 1.0, -2.0]) / math.sqrt(3.0)
    return t / math.sqrt(2.0)


def _colour_matrix(n_gluons: int):
    """The orderings of the gluons and C[s, s'] = sum over colours (T^s)_{ij} conj((T^s')_{ij})."""
    t = _gell_mann()
    letters = "abc"[:n_gluons]
    inner = "pq"
    orders = list(itertools.permutations(range(n_gluons)))

    def string(order):
        rows = ["i"] + list(inner[:n_gluons - 1]) + ["j"]
        spec = ",".join(f"{letters[g]}{rows[s]}{rows[s + 1]}" for s, g in enumerate(order))
        return np.einsum(f"{spec}->{letters}ij", *([t] * n_gluons))

    strings = [string(o) for o in orders]
    return orders, np.array([[np.vdot(b, a) for b in strings] for a in strings])


def _quark_line_sum(moms) -> float:
    """sum over helicities and colours of |M|^2 / g^(2(n-2)) for 0 -> qbar(k0) q(k1) g(k2) .. g(k_n-1),
    momenta outgoing, n = 4 or 5."""
    n = len(moms)
    lam = [_spinor(k) for k in moms]

    def ang(i, j):
        return lam[i][0] * lam[j][1] - lam[i][1] * lam[j][0]

    orders, colour = _colour_matrix(n - 2)
    total = 0.0
    for gluon in range(2, n):  # the one negative-helicity gluon of an MHV configuration
        for qbar_minus in (True, False):
            num = ang(0, gluon) ** 3 * ang(1, gluon) if qbar_minus else ang(0, gluon) * ang(1, gluon) ** 3
            a = []
            for o in orders:
                ring = [0, 1] + [2 + g for g in o]
                a.append(1j * num / np.prod([ang(ring[m], ring[(m + 1) % n]) for m in range(n)]))
            a = np.array(a)
            total += float(np.real(a @ colour @ np.conj(a)))
    # at n = 5 the parity conjugates (two negative gluons) add as much again; at n = 4 they are
    # the same configurations
    return (2.0 if n == 5 else 1.0) * total


def _dot(a, b):
    return a[0] * b[0] - a[1:] @ b[1:]


def test_the_reference_quark_line_gives_the_textbook_q_qbar_to_g_g():
    """The reference above at n = 4, averaged (1/4 spins, 1/9 colours), against
    (32/27)(t^2 + u^2)/(t u) - (8/3)(t^2 + u^2)/s^2 (Ellis, Stirling & Webber, Table 7.1), to 1e-10:
    it fixes the reference's normalization before it judges five partons."""
    p = build("qcd-tree", ["u", "ubar"], ["g", "g"]).probe_momenta(3, 4)
    for k in range(4):
        s = 2.0 * _dot(p[k, 0], p[k, 1])
        t = _dot(p[k, 0] - p[k, 2], p[k, 0] - p[k, 2])
        u = _dot(p[k, 0] - p[k, 3], p[k, 0] - p[k, 3])
        textbook = 32 / 27 * (t * t + u * u) / (t * u) - 8 / 3 * (t * t + u * u) / s ** 2
        assert _quark_line_sum([-p[k, 0], -p[k, 1], p[k, 2], p[k, 3]]) / 36.0 == pytest.approx(textbook, rel=1e-10)


# incoming, outgoing, the slots of (qbar, q, gluons...) among the legs as outgoing, the average
CROSSINGS = [
    (["u", "ubar"], ["g", "g", "g"], (0, 1, 2, 3, 4), 36.0),
    (["g", "u"], ["u", "g", "g"], (1, 2, 0, 3, 4), 96.0),
    (["g", "g"], ["d", "dbar", "g"], (3, 2, 0, 1, 4), 256.0),
    (["s", "g"], ["g", "s", "g"], (0, 3, 1, 2, 4), 96.0),
]


@pytest.mark.parametrize("incoming, outgoing, slots, average", CROSSINGS)
def test_two_quarks_and_three_gluons_against_the_mhv_colour_sum(incoming, outgoing, slots, average):
    """sum |M|^2 of every crossing of q qbar g g g from the pure-QCD model equals the MHV
    amplitudes of a quark line with the colour sum (reference above), to 1e-10."""
    amp = build("qcd-tree", incoming, outgoing)
    p = amp.probe_momenta(7, 4)
    got = amp.squared(p) / GS2 ** 3
    for k in range(4):
        out = [-p[k, i] if i < 2 else p[k, i] for i in range(5)]
        assert got[k] == pytest.approx(_quark_line_sum([out[i] for i in slots]) / average, rel=1e-10)


@pytest.mark.parametrize("incoming, outgoing, leg", [
    (["u", "d"], ["u", "d", "g"], 4),
    (["u", "ubar"], ["d", "dbar", "g"], 4),
    (["g", "u"], ["u", "g", "g"], 0),
])
def test_pure_qcd_amplitudes_keep_the_ward_identity(incoming, outgoing, leg):
    """A gluon polarization replaced by its momentum gives zero (Peskin & Schroeder, sec. 16.3),
    for the four-quark processes that the MHV check above does not reach."""
    from tests.test_tree import check_ward

    check_ward("qcd-tree", incoming, outgoing, leg, {})


def test_every_light_flavour_has_one_amplitude():
    """With no electroweak couplings u ubar -> g g g and d dbar -> g g g are the same function, and
    u d -> u d g the same as c s -> c s g (flavour blindness of QCD, common practice, no source)."""
    p = build("qcd-tree", ["u", "ubar"], ["g", "g", "g"]).probe_momenta(2, 3)
    np.testing.assert_allclose(build("qcd-tree", ["d", "dbar"], ["g", "g", "g"]).squared(p),
                               build("qcd-tree", ["u", "ubar"], ["g", "g", "g"]).squared(p), rtol=1e-12)
    np.testing.assert_allclose(build("qcd-tree", ["c", "s"], ["c", "s", "g"]).squared(p),
                               build("qcd-tree", ["u", "d"], ["u", "d", "g"]).squared(p), rtol=1e-12)


@pytest.mark.parametrize("model, incoming, outgoing, mirrored", [
    ("qcd-tree", ["u", "ubar"], ["g", "g", "g"], True),
    ("qcd-tree", ["u", "d"], ["u", "d", "g"], True),
    ("standard", ["e-", "e+"], ["u", "ubar", "g"], False),  # the Z's chiral couplings
])
def test_mirror_helicities_are_evaluated_once_where_parity_allows(model, incoming, outgoing, mirrored):
    """With vector-like couplings and massless partons, flipping every helicity conjugates each
    amplitude up to a phase, so one configuration of each mirror pair is evaluated and counted twice
    (Dixon, hep-ph/9601359, sec. 3, from memory); chiral couplings break it and every configuration
    stays. Either way sum |M|^2 equals the plain sum over all configurations to 1e-12."""
    amp = build(model, incoming, outgoing)
    assert (amp.summed_factor == 2.0) is mirrored
    assert len(amp.summed_configs) * amp.summed_factor == len(amp.helicity_configs)
    p = amp.probe_momenta(21, 5)
    fast = amp.squared(p)
    amp.summed_configs, amp.summed_factor = list(amp.helicity_configs), 1.0
    np.testing.assert_allclose(fast, amp.squared(p), rtol=1e-12)
