"""The heavy-top effective coupling of the Higgs boson to gluons (model standard-gluon-higgs)
against published formulas.

References, named at each check:

- Ellis, Hinchliffe, Soldate & van der Bij, Nucl. Phys. B297 (1988) 221: in the heavy-top limit,
  summed over every colour and helicity, |M(g g -> H g)|^2 = N (N^2 - 1) g_s^2 C^2
  (m_H^8 + s^4 + t^4 + u^4) / (s t u) and |M(q qbar -> H g)|^2 = (N^2 - 1)/2 g_s^2 C^2 (t^2 + u^2) / s,
  with C = alpha_s / (3 pi v) (from memory). The normalization is tied to the published
  g g -> H cross-section sigma_0 = G_F alpha_s^2 / (288 sqrt2 pi) (Georgi, Glashow, Machacek &
  Ross, Phys. Rev. Lett. 40 (1978) 692; Dawson, Nucl. Phys. B359 (1991) 283): sum |M(gg -> H)|^2 =
  4 C^2 m_H^4 gives sigma_0, and the soft-gluon limit of the first formula, 4 g^2 N s / (t u) times
  that (eikonal factor), fixes the overall factor to 1;
- gauge invariance (Ward identity, Peskin & Schroeder (1995), sec. 16.3) and Lorentz invariance
  (common practice, no source) of g g -> H g g, which needs the five-leg vertex.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from gen.physics.kinematics import dot
from gen.physics.tree import build, load, resolve
from gen.physics.tree.model import MODEL_FILES, ModelFileError

from test_tree import _boost, check_ward

MODEL = "standard-gluon-higgs"


def _couplings():
    par = resolve(MODEL)
    vev = load(MODEL).values(par, "fixed")["vev"].real
    a_s = par["alpha_s"]
    return 4.0 * math.pi * a_s, a_s / (3.0 * math.pi * vev)


def _stu(p):
    s = dot(p[:, 0] + p[:, 1], p[:, 0] + p[:, 1])
    t = dot(p[:, 0] - p[:, 2], p[:, 0] - p[:, 2])
    u = dot(p[:, 0] - p[:, 3], p[:, 0] - p[:, 3])
    return s, t, u


def test_gluon_fusion_with_a_gluon_against_the_published_formula():
    """sum |M(g g -> H g)|^2 = N (N^2 - 1) g^2 C^2 (m_H^8 + s^4 + t^4 + u^4) / (s t u) (Ellis et al.,
    1988; normalization through sigma_0 and the soft limit, see the module docstring)."""
    g2, c = _couplings()
    amp = build(MODEL, ["g", "g"], ["H", "g"])
    p = amp.probe_momenta(8, 11)
    s, t, u = _stu(p)
    mh = amp.legs[2].mass
    ref = 3 * 8 * g2 * c * c * (mh ** 8 + s ** 4 + t ** 4 + u ** 4) / (s * t * u)
    np.testing.assert_allclose(amp.squared(p) / amp.average, ref, rtol=1e-10)


@pytest.mark.parametrize("incoming, outgoing, form", [
    (["u", "ubar"], ["H", "g"], lambda s, t, u: (t * t + u * u) / s),
    (["u", "g"], ["H", "u"], lambda s, t, u: -(s * s + t * t) / u),  # crossed: s <-> u, one fermion
    (["g", "dbar"], ["H", "dbar"], lambda s, t, u: -(s * s + t * t) / u),
])
def test_quark_channels_against_the_published_formula(incoming, outgoing, form):
    """sum |M(q qbar -> H g)|^2 = (N^2 - 1)/2 g^2 C^2 (t^2 + u^2)/s and its crossings (Ellis et al., 1988)."""
    g2, c = _couplings()
    amp = build(MODEL, incoming, outgoing)
    p = amp.probe_momenta(8, 12)
    s, t, u = _stu(p)
    if incoming[0] == "g":  # the quark is the second beam: its transfer is to leg 3
        t, u = dot(p[:, 1] - p[:, 2], p[:, 1] - p[:, 2]), dot(p[:, 1] - p[:, 3], p[:, 1] - p[:, 3])
    np.testing.assert_allclose(amp.squared(p) / amp.average, 4.0 * g2 * c * c * form(s, t, u), rtol=1e-10)


@pytest.mark.parametrize("incoming, outgoing, leg", [
    (["g", "g"], ["H", "g"], 3),
    pytest.param(["g", "g"], ["H", "g", "g"], 4, marks=pytest.mark.slow),
    (["u", "g"], ["H", "u", "g"], 1),
])
def test_effective_vertices_are_gauge_invariant(incoming, outgoing, leg):
    """Ward identity of the gluons with the two-, three- and four-gluon Higgs vertices together
    (Peskin & Schroeder (1995), sec. 16.3): a wrong sign or factor in one of them breaks it."""
    check_ward(MODEL, incoming, outgoing, leg, {})


@pytest.mark.slow
def test_a_dropped_five_leg_vertex_breaks_gauge_invariance(tmp_path):
    """Without the H g g g g vertex, g g -> H g g is not gauge invariant: the Ward check sees it."""
    text = MODEL_FILES[MODEL].read_text()
    head, *blocks = text.split("[[vertex]]")
    cut = tmp_path / "no-five.toml"
    cut.write_text("[[vertex]]".join([head.replace('extends = "standard"', f'extends = "{_standard_path()}"')]
                                     + [b for b in blocks if "four gluons (effective)" not in b]))
    with pytest.raises(AssertionError):
        check_ward(str(cut), ["g", "g"], ["H", "g", "g"], 4, {})


def _standard_path():
    return str(MODEL_FILES["standard"])


@pytest.mark.slow
def test_higgs_with_two_gluons_is_lorentz_invariant():
    """sum |M|^2 of g g -> H g g under a random boost (common practice, no source)."""
    amp = build(MODEL, ["g", "g"], ["H", "g", "g"])
    p = amp.probe_momenta(6, 13)
    np.testing.assert_allclose(amp.squared(_boost(p, np.array([0.2, -0.4, 0.5]))), amp.squared(p), rtol=1e-9)


def test_an_extended_model_file_holds_the_base_and_its_own_vertices(tmp_path):
    """`extends` adds to the base model; a loop of extensions is refused, naming the key."""
    base = load("standard")
    ext = load(MODEL)
    assert len(ext.vertices) == len(base.vertices) + 3
    assert dict(ext.derived)["vev"] == dict(base.derived)["vev"]
    a, b = tmp_path / "a.toml", tmp_path / "b.toml"
    a.write_text('[about]\nname = "a"\nextends = "b.toml"\ndescription = "x"\nparameters = "electroweak"\n')
    b.write_text('[about]\nname = "b"\nextends = "a.toml"\ndescription = "x"\nparameters = "electroweak"\n')
    with pytest.raises(ModelFileError, match="extends"):
        load(str(a))


def test_gluons_at_an_effective_vertex_need_a_colour(tmp_path):
    """A model file that gives the effective vertex no colour structure is refused, naming it."""
    f = tmp_path / "bad.toml"
    f.write_text(f'[about]\nname = "bad"\nextends = "{_standard_path()}"\ndescription = "x"\n'
                 '[[vertex]]\nname = "bad"\nlegs = ["g", "g", "H"]\nform = "strength-pair-scalar"\ncoupling = "1"\n')
    with pytest.raises(ModelFileError, match="colour 'adjoint' or 'pair'"):
        load(str(f))


# --- p p -> H + jet against an independent integral -------------------------------------------

CHARGED = [1, 2, 3, 4, 5]  # the quark flavours of the jet group (five-flavour scheme)


def _higgs_jet_reference(sqrt_s, pt_min, mu, n=400_000, seed=3):
    """sigma(p p -> H + jet, p_T > pt_min) by plain Monte Carlo in (log tau, y, cos theta*) of the
    published heavy-top |M|^2 (module docstring: g g -> H g, q qbar -> H g and its crossings
    q g -> H q), densities and alpha_s of the shipped set at mu, v = (sqrt2 G_F)^(-1/2) (common
    practice, no source); written apart from the library. Returns (sigma, error) in pb."""
    from gen.physics import pdf
    from gen.physics.constants import HBARC2_PB

    par = resolve(MODEL)
    mh = par["m_H"]
    v = (math.sqrt(2.0) * par["g_fermi"]) ** -0.5
    s_pdf = pdf.load()
    a_s = float(s_pdf.alpha_s(np.array([mu]))[0])
    g2, c2 = 4 * math.pi * a_s, (a_s / (3 * math.pi * v)) ** 2
    s = sqrt_s ** 2
    rng = np.random.default_rng(seed)
    tau_min = (mh ** 2 + 2 * pt_min ** 2 + 2 * pt_min * math.hypot(mh, pt_min)) / s  # sqrt(s-hat) >= m_T + p_T
    u1, u2, u3 = rng.random((3, n))
    tau = tau_min ** (1 - u1)
    ylim = -0.5 * np.log(tau)
    y = ylim * (2 * u2 - 1)
    c = 2 * u3 - 1
    jac = tau * math.log(1 / tau_min) * 2 * ylim * 2
    x1, x2 = np.sqrt(tau) * np.exp(y), np.sqrt(tau) * np.exp(-y)
    shat = tau * s
    rs = np.sqrt(shat)
    e3, p = (shat + mh ** 2) / (2 * rs), (shat - mh ** 2) / (2 * rs)
    t = mh ** 2 - rs * (e3 - p * c)
    u = mh ** 2 - rs * (e3 + p * c)
    ok = p * np.sqrt(1 - c * c) >= pt_min
    f1 = {q: s_pdf.xfx(q, x1, mu) / x1 for q in [-5, -4, -3, -2, -1, 21] + CHARGED}
    f2 = {q: s_pdf.xfx(q, x2, mu) / x2 for q in f1}
    gg = 24 * g2 * c2 * (mh ** 8 + shat ** 4 + t ** 4 + u ** 4) / (shat * t * u) / 256
    qqbar = 4 * g2 * c2 * (t * t + u * u) / shat / 36
    qg = -4 * g2 * c2 * (shat ** 2 + t * t) / u / 96  # quark from beam 1: its transfer to the jet is u
    gq = -4 * g2 * c2 * (shat ** 2 + u * u) / t / 96
    lum = f1[21] * f2[21] * gg
    for q in CHARGED:
        for sq in (q, -q):
            lum = lum + f1[sq] * f2[-sq] * qqbar + f1[sq] * f2[21] * qg + f1[21] * f2[sq] * gq
    w = np.where(ok, HBARC2_PB * jac * lum * p / (16 * math.pi * shat * rs), 0.0)
    return w.mean(), w.std() / math.sqrt(n)


@pytest.mark.slow
def test_higgs_plus_jet_at_a_hadron_collider_against_an_independent_integral():
    """p p -> H + jet at 13.6 TeV, p_T > 30 GeV, mu = 125 GeV: vegas over the automatic process
    (its p_T^2, y3, y4 variables, every jet subprocess) against the plain Monte Carlo above, within
    5 combined standard deviations."""
    from conftest import card, integrate

    text = card(MODEL, ["p", "p"], ["H", "jet"], "sqrt_s = 13600.0",
                "[cuts]\npt_min = 30.0\n[scales]\nrenormalization = 125.0\nfactorization = 125.0")
    _, xs = integrate(text, warmup=3, iterations=4, points=3000)
    ref, err = _higgs_jet_reference(13600.0, 30.0, 125.0)
    assert abs(xs.value - ref) <= 5 * math.hypot(xs.error, err), (xs.value, xs.error, ref, err)
    assert err < 0.01 * ref
