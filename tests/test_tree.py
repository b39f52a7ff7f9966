"""The automatic tree amplitudes (gen.physics.tree) against outside references.

References, named at each check:

- the hand-coded library (gen.physics.matrix), whose formulas are themselves checked against
  published ones in tests/test_matrix_elements.py and tests/test_cross_sections.py (textbook
  2 -> 2 of QED, QCD (Ellis, Stirling & Webber, QCD and Collider Physics (1996), Table 7.1), the
  electroweak e+e- -> f fbar, Bhabha, Z H, Drell-Yan and W production, e+e- -> q qbar g);
- Parke & Taylor, Phys. Rev. Lett. 56 (1986) 2459: the MHV colour-ordered gluon amplitudes
  |A(1..n)| = g^(n-2) |<ij>|^4 / prod |<k k+1>| = g^(n-2) s_ij^2 / prod |s_k,k+1|^(1/2), in the
  normalization of Dixon, hep-ph/9601359 (Tr T^a T^b = delta^ab); all-plus and one-minus
  amplitudes vanish (same sources);
- gauge invariance: an amplitude with a photon or gluon polarization replaced by its momentum
  vanishes (Ward identity; Peskin & Schroeder (1995), sec. 5.5 and 16.3) and Lorentz invariance of
  sum |M|^2 (common practice, no source);
- the high-energy cancellation in e+e- -> W+W-: without the s-channel gamma and Z the
  cross-section grows with s, with them it falls (Peskin & Schroeder (1995), sec. 21.2; from memory),
  and its Born threshold limit sigma = pi alpha^2 beta / (s s_W^4) (Fadin, Khoze & Martin, Phys.
  Lett. B311 (1993) 311; from memory).
"""

from __future__ import annotations

import math
import tomllib
from pathlib import Path

import numpy as np
import pytest

from gen.physics.kinematics import dot
from gen.physics.matrix import MODELS
from gen.physics.tree import allowed, build, load
from gen.physics.tree.amplitudes import FlowChooser
from gen.physics.tree.model import ModelFileError

ROOT = Path(__file__).resolve().parents[1]
PURE_QCD = {"scheme": "thomson", "alpha": 1e-20}  # electroweak couplings off: pure QCD from the standard model


def _mandelstam(p):
    s = dot(p[:, 0] + p[:, 1], p[:, 0] + p[:, 1])
    t = dot(p[:, 0] - p[:, 2], p[:, 0] - p[:, 2])
    u = dot(p[:, 0] - p[:, 3], p[:, 0] - p[:, 3])
    return s, t, u


# --- the hand-coded library, reproduced ---------------------------------------------------------

def _library_cases():
    """(library model, spec, engine model, given parameters, massless overrides) for one flavour
    of each kind of process (the other flavours differ in charges only)."""
    cases = []
    skip_flavours = ("s", "c", "tau-")
    for name in ("qed", "electroweak", "qcd", "scalar"):
        for spec in MODELS[name].processes:
            if len(spec.incoming) != 2 or len(spec.outgoing) != 2:
                continue
            if any(p.rstrip("bar").rstrip("+-") in skip_flavours or p in ("sbar", "cbar") for p in spec.incoming + spec.outgoing):
                continue
            engine = {"qed": "qed-tree", "scalar": "scalar-tree"}.get(name, "standard")
            given: dict = {}
            if name == "scalar":
                given = {"cubic": 0.7, "mass": 2.0}
            elif name == "qcd" and "gamma" not in spec.outgoing:
                given = dict(PURE_QCD)
            elif name == "qcd":
                given = {"scheme": "thomson"}  # the library's prompt photons use alpha(0)
            elif name == "electroweak":
                given = {"cabibbo_angle": 0.227}
            cases.append(pytest.param(spec, engine, given, id=f"{name}: {spec.label}"))
    return cases


@pytest.mark.parametrize("spec, engine, given", _library_cases())
def test_the_recursion_reproduces_the_hand_coded_library(spec, engine, given):
    """Reference: the library's |M|^2 (its sources in its docstrings). The library keeps b quarks
    massless in |M|^2, and electrons where its docstring says so; they are massless here too."""
    masses = {"b": 0.0}
    if "massless electrons" in spec.source or "electron mass neglected" in spec.source:
        masses["e-"] = 0.0
    amp = build(engine, spec.incoming, spec.outgoing, given=given, masses=masses)
    p = amp.probe_momenta(7, 6)
    par = dict(MODELS[spec.model].resolve({k: v for k, v in given.items() if k in MODELS[spec.model].params}))
    par.update({f"m{i + 1}": leg.mass for i, leg in enumerate(amp.legs)})
    if spec.model == "qcd":
        par["alpha_s"] = 0.118
    ref = spec.matrix(*_mandelstam(p), par)
    np.testing.assert_allclose(amp.squared(p), ref, rtol=1e-10)


def _photon_qcd_model(tmp_path) -> str:
    """The standard model file without the Z, W and Higgs vertices: photon and gluon exchange only."""
    text = (ROOT / "gen/physics/tree/standard.toml").read_text()
    head, *blocks = text.split("[[vertex]]")
    keep = [b for b in blocks if any(k in b for k in ('name = "photon', 'name = "gluon', 'name = "three gluons"',
                                                       'name = "four gluons"'))]
    path = tmp_path / "photon-qcd.toml"
    path.write_text("[[vertex]]".join([head.replace('name = "standard"', 'name = "photon-qcd"')] + keep))
    return str(path)


def test_three_partons_against_the_library(tmp_path):
    """e+e- -> gamma* -> q qbar g: reference the library's form (Ellis, Ross & Terrano, Nucl. Phys.
    B 178 (1981) 421, normalized to DeGrand, Ng & Tye, Phys. Rev. D 16 (1977) 3251), photon only."""
    from gen.physics.matrix import qcd

    amp = build(_photon_qcd_model(tmp_path), ["e-", "e+"], ["u", "ubar", "g"], given={"scheme": "thomson"})
    p = amp.probe_momenta(2, 6)
    par = {"alpha": MODELS["electroweak"].resolve({"scheme": "thomson"})["alpha"], "alpha_s": 0.118, "m1": 0.0, "m2": 0.0}
    np.testing.assert_allclose(amp.squared(p), qcd.make_three_jet("u")(p, par), rtol=1e-10)


# --- Parke-Taylor ---------------------------------------------------------------------------

def _flow_amplitude(flows, ext, moms, order, hels):
    """The colour-flow amplitude of a gluon ordering: line k from gluon order[k] to order[k+1]."""
    n = len(order)
    col = [[None, None] for _ in range(n)]
    for k in range(n):
        col[order[k]][0] = k
        col[order[(k + 1) % n]][1] = k
    rec = flows.recursion
    return rec.amplitude([rec.dress(ext[(i, hels[i])], 8, tuple(col[i])) for i in range(n)], moms)


# seven gluons: the same recursion as six, and its set-up alone takes a minute here; the
# colour-ordered path is checked against Parke-Taylor at seven (test_colour_ordered_gluon_path_is_parke_taylor)
@pytest.mark.parametrize("n", [4, 5, pytest.param(6, marks=pytest.mark.slow)])
def test_colour_ordered_gluon_amplitudes_are_parke_taylor(n):
    """|A(sigma; MHV)| = g^(n-2) s_ij^2 / prod_k |s_{sigma_k sigma_k+1}|^(1/2) for every pair of
    negative helicities and several orderings, to 1e-10; all-plus and one-minus vanish
    (Parke & Taylor 1986; normalization of Dixon, hep-ph/9601359)."""
    import itertools

    amp = build("standard", ["g", "g"], ["g"] * (n - 2), given=PURE_QCD, colours="sample")
    flows = FlowChooser(amp)
    p = amp.probe_momenta(3, 3)
    ext, moms = amp._externals(p), amp._moms(p)
    q = [(p[:, i] if i >= 2 else -p[:, i]) for i in range(n)]  # all outgoing: incoming legs crossed

    def s(i, j):
        return 2.0 * dot(q[i], q[j])

    gs = math.sqrt(4.0 * math.pi * 0.118)
    biggest = 0.0
    for minus in itertools.combinations(range(n), 2):
        h_out = [-1 if i in minus else 1 for i in range(n)]
        hels = [-h if i < 2 else h for i, h in enumerate(h_out)]  # crossing flips an incoming helicity
        for rest in list(itertools.permutations(range(1, n)))[:4]:
            order = (0,) + rest
            a = _flow_amplitude(flows, ext, moms, order, hels)
            den = np.prod([np.abs(s(order[k], order[(k + 1) % n])) for k in range(n)], axis=0)
            ref = gs ** (n - 2) * np.abs(s(*minus)) ** 2 / np.sqrt(den)
            np.testing.assert_allclose(np.abs(a), ref, rtol=1e-10)
            biggest = max(biggest, float(ref.max()))
    all_plus = [-1 if i < 2 else 1 for i in range(n)]
    one_minus = [1] + all_plus[1:]
    for hels in (all_plus, one_minus):
        assert np.abs(_flow_amplitude(flows, ext, moms, tuple(range(n)), hels)).max() < 1e-12 * biggest


@pytest.mark.slow
def test_colour_sampling_averages_to_the_exact_colour_sum():
    """g g -> g g g at one phase-space point: the mean of sampled colour assignments equals the exact
    colour sum, which for five gluons is the leading-colour formula
    g^6 N^3 (N^2 - 1) sum_{sigma in S_5/Z_5} 2 sum_{i<j} s_ij^4 / prod |s_{sigma_k sigma_k+1}|
    (MHV and its conjugate; Parke & Taylor 1986, no subleading colour for n <= 5, Dixon
    hep-ph/9601359, sec. 4)."""
    import itertools

    amp = build("standard", ["g", "g"], ["g", "g", "g"], given=PURE_QCD, colours="sample")
    p = np.repeat(amp.probe_momenta(11, 1), 2500, axis=0)
    est = amp.squared(p, np.random.default_rng(4)) / amp.average
    q = [(p[0, i] if i >= 2 else -p[0, i]) for i in range(5)]

    def s(i, j):
        return abs(2.0 * dot(q[i], q[j]))

    num = sum(s(i, j) ** 4 for i, j in itertools.combinations(range(5), 2))
    orders = [(0,) + r for r in itertools.permutations(range(1, 5))]
    ring = sum(1.0 / math.prod(s(o[k], o[(k + 1) % 5]) for k in range(5)) for o in orders)
    gs2 = 4.0 * math.pi * 0.118
    exact = gs2 ** 3 * 27.0 * 8.0 * 2.0 * num * ring
    mean, err = est.mean(), est.std() / math.sqrt(est.size)
    assert abs(mean - exact) < 4.0 * err
    assert err < 0.1 * exact  # the check has teeth


def test_helicity_sampling_averages_to_the_helicity_sum():
    """e+e- -> mu+ mu- gamma at fixed points: the mean over sampled helicity configurations equals
    the exact helicity sum (an unbiased estimator; common practice, no source)."""
    exact_amp = build("standard", ["e-", "e+"], ["mu-", "mu+", "gamma"])
    sampled = build("standard", ["e-", "e+"], ["mu-", "mu+", "gamma"], helicities="sample")
    p0 = exact_amp.probe_momenta(5, 2)
    exact = exact_amp.squared(p0)
    for k in range(2):
        est = sampled.squared(np.repeat(p0[k:k + 1], 4000, axis=0), np.random.default_rng(k))
        assert abs(est.mean() - exact[k]) < 4.0 * est.std() / math.sqrt(est.size)


# --- gauge and Lorentz invariance --------------------------------------------------------------

@pytest.mark.parametrize("incoming, outgoing, leg", [
    (["g", "g"], ["g", "g"], 3),
    (["u", "ubar"], ["g", "g"], 2),
    (["e-", "e+"], ["u", "ubar", "g"], 4),
    (["g", "g"], ["u", "ubar", "g"], 0),
    (["e-", "e+"], ["mu-", "mu+", "gamma"], 4),
    (["gamma", "gamma"], ["W+", "W-"], 0),
    (["e-", "e+"], ["W+", "W-", "gamma"], 4),
])
def test_ward_identity(incoming, outgoing, leg):
    """A photon or gluon polarization replaced by its momentum gives zero for every colour and
    helicity configuration, where single diagrams do not (Peskin & Schroeder (1995), secs. 5.5, 16.3)."""
    # fixed widths break gauge invariance at O(Gamma/M) (see the complex-mass test): no W width here
    given = {"width_W": 0.0} if "W+" in outgoing else (PURE_QCD if "e-" not in incoming else {})
    check_ward("standard", incoming, outgoing, leg, given)


def check_ward(model, incoming, outgoing, leg, given) -> None:
    """The Ward identity of leg `leg` of a process, for its colour classes and helicities."""
    amp = build(model, incoming, outgoing, given=given, colour_ordered=False)
    p = amp.probe_momenta(9, 4)
    ext, moms = amp._externals(p), amp._moms(p)
    k = p[:, leg, :].T.astype(complex)
    fast = build(model, incoming, outgoing, given=given)
    if fast.ordered is not None:  # gluons only: the colour-ordered amplitudes obey it one by one
        for h in fast.helicity_configs[:8]:
            normal = np.abs(fast.ordered.trace_amplitudes(fast._ordered_amps(ext, moms, h))).max()
            shifted = dict(ext)
            shifted[(leg, h[leg])] = k
            ward = np.abs(fast.ordered.trace_amplitudes(fast._ordered_amps(shifted, moms, h))).max()
            assert ward <= 1e-9 * np.abs(k).max() * normal
    classes = amp.colour_classes[:6] if amp.colour_classes else [((None,) * len(amp.legs), 1.0)]
    worst = 0.0
    for cols, _ in classes:
        for h in amp.helicity_configs[:8]:
            normal = np.abs(amp._amp(ext, moms, h, cols, {}))
            shifted = dict(ext)
            shifted[(leg, h[leg])] = k
            ward = np.abs(amp._amp(shifted, moms, h, cols, {}))
            scale = np.abs(k).max() / math.sqrt(2.0)
            # relative to the amplitude with a polarization of the same size
            worst = max(worst, float((ward / (np.maximum(normal, 1e-300) * scale)).max())) if normal.max() > 0 else worst
            assert np.all(ward <= 1e-9 * scale * max(normal.max(), 1e-300) + 1e-300)
    assert worst < 1e-9


def _boost(p, beta):
    """A general boost of momenta (N, n, 4) by velocity beta (3,)."""
    b2 = float(np.dot(beta, beta))
    g = 1.0 / math.sqrt(1.0 - b2)
    bp = p[..., 1:] @ beta
    out = np.empty_like(p)
    out[..., 0] = g * (p[..., 0] + bp)
    out[..., 1:] = p[..., 1:] + ((g - 1.0) * bp / b2 + g * p[..., 0])[..., None] * beta
    return out


@pytest.mark.parametrize("incoming, outgoing", [
    (["e-", "e+"], ["mu-", "nu_mubar", "u", "dbar"]),
    (["e-", "e+"], ["u", "ubar", "g", "g"]),
    (["g", "g"], ["t", "tbar"]),
    (["e-", "e+"], ["Z", "H"]),
])
def test_lorentz_invariance(incoming, outgoing):
    """sum |M|^2 is unchanged by a boost in a general direction (common practice, no source)."""
    amp = build("standard", incoming, outgoing)
    p = amp.probe_momenta(13, 5)
    np.testing.assert_allclose(amp.squared(_boost(p, np.array([0.3, -0.5, 0.4]))), amp.squared(p), rtol=1e-9)


def _sigma_2to2(amp, sqrt_s, n=200):
    """sigma (pb) of a 2 -> 2 process with massless beams by Gauss-Legendre in cos theta."""
    from gen.physics.constants import HBARC2_PB
    from gen.physics.kinematics import two_body_momentum

    m3, m4 = amp.legs[2].mass, amp.legs[3].mass
    c, w = np.polynomial.legendre.leggauss(n)
    pf = two_body_momentum(sqrt_s, m3, m4)
    e3 = math.sqrt(pf * pf + m3 * m3)
    p = np.zeros((n, 4, 4))
    p[:, 0] = (sqrt_s / 2, 0, 0, sqrt_s / 2)
    p[:, 1] = (sqrt_s / 2, 0, 0, -sqrt_s / 2)
    sn = np.sqrt(1 - c * c)
    p[:, 2] = np.stack([np.full(n, e3), pf * sn, np.zeros(n), pf * c], axis=1)
    p[:, 3] = p[:, 0] + p[:, 1] - p[:, 2]
    me = amp.squared(p)
    return HBARC2_PB * (w * me).sum() * pf / (16.0 * math.pi * sqrt_s ** 3)  # dsigma/dcos = |M|^2 p_f/(16 pi s^3/2)


def test_w_pairs_cancel_at_high_energy(tmp_path):
    """e+e- -> W+W- on shell: with the s-channel photon and Z, s sigma stays of order
    log s (it falls from 0.5 to 5 TeV); the neutrino exchange alone grows like s (Peskin &
    Schroeder (1995), sec. 21.2, from memory)."""
    text = (ROOT / "gen/physics/tree/standard.toml").read_text()
    head, *blocks = text.split("[[vertex]]")
    t_only = tmp_path / "neutrino-only.toml"
    t_only.write_text("[[vertex]]".join([head] + [b for b in blocks if "W pair and" not in b and "Z and fermions" not in b
                                                    and "photon and charged" not in b]))
    full = build("standard", ["e-", "e+"], ["W+", "W-"])
    alone = build(str(t_only), ["e-", "e+"], ["W+", "W-"])
    s_full = [_sigma_2to2(full, e) * e * e for e in (500.0, 5000.0)]
    s_alone = [_sigma_2to2(alone, e) * e * e for e in (500.0, 5000.0)]
    assert s_full[1] < 3.0 * s_full[0]  # s sigma grows like log s (about 2x here)
    assert s_alone[1] > 20.0 * s_alone[0]  # the unitarity-violating growth, about 100x for 10x in sqrt(s)
    assert _sigma_2to2(full, 5000.0) < 0.01 * _sigma_2to2(alone, 5000.0)


@pytest.mark.parametrize("beta, tol", [(0.03, 5e-4), (0.01, 6e-5), (0.003, 6e-6)])
def test_w_pairs_at_threshold_follow_the_published_born_limit(beta, tol):
    """e+e- -> W+W- on shell near threshold: sigma = pi alpha^2 beta / (s s_W^4) (1 + O(beta^2)), the
    S-wave neutrino exchange (the photon and Z enter at beta^3), in the same couplings (Fadin, Khoze
    & Martin, Phys. Lett. B311 (1993) 311, eq. 2; Denner, Fortsch. Phys. 41 (1993) 307; from
    memory). Here the O(beta^2) term is about -0.32 beta^2, so the tolerance scales with beta^2."""
    from gen.physics.constants import HBARC2_PB
    from gen.physics.tree import resolve

    par = resolve("standard")
    amp = build("standard", ["e-", "e+"], ["W+", "W-"])
    sqrt_s = 2.0 * par["m_W"] / math.sqrt(1.0 - beta * beta)
    limit = HBARC2_PB * math.pi * par["alpha"] ** 2 * beta / (sqrt_s ** 2 * par["sw2"] ** 2)
    assert _sigma_2to2(amp, sqrt_s) == pytest.approx(limit, rel=tol)
    assert abs(_sigma_2to2(amp, sqrt_s) / limit - 1.0) > 0.1 * tol  # the beta^2 term is seen: not a tautology


# --- processes from the card -------------------------------------------------------------------

@pytest.mark.parametrize("incoming, outgoing, rule", [
    (["e-", "e+"], ["mu-", "e+"], "lepton number"),
    (["e-", "e+"], ["u", "dbar"], "electric charge"),
    (["e-", "e+"], ["gamma", "g"], "colour"),
    (["e-", "e+"], ["u", "u"], "electric charge"),
    (["e-", "e+"], ["H", "H"], "no vertex"),
    (["e-", "e+"], ["phi", "phi"], "no particle"),
])
def test_a_process_the_model_forbids_names_the_rule(incoming, outgoing, rule):
    """Conservation laws (common practice, no source)."""
    why = allowed("standard", incoming, outgoing)
    assert why is not None and rule in why


def _card(outgoing, cuts="", model="standard", sqrt_s=91.19, extra=""):
    names = ", ".join(f'"{n}"' for n in outgoing)
    lines = ["[process]", f'model = "{model}"', 'incoming = ["e-", "e+"]', f"outgoing = [{names}]", extra,
             "[collider]", f"sqrt_s = {sqrt_s}", "[cuts]", cuts,
             "[integration]", "warmup_iterations = 2", "iterations = 3", "points_per_iteration = 2000",
             "[sampling]", "events = 200", "weighted_events = 100", "calibration_points = 2000", "chunk = 1000"]
    return "\n".join(lines) + "\n"


@pytest.mark.parametrize("outgoing, cuts, key", [
    (["mu-", "mu+", "gamma"], "pt_min = 5.0", "cuts.pair_mass_min"),
    (["mu-", "mu+", "gamma"], "pair_mass_min = 5.0", "cuts.pt_min"),
    (["u", "ubar", "g"], "pt_min = 5.0", "cuts.pair_mass_min"),
    (["u", "ubar", "g"], 'pair_mass_min = 5.0\npt_min = 5.0\nparticles = ["u", "ubar"]', "cuts.pair_mass_min"),
])
def test_an_infrared_unsafe_card_names_the_missing_cut(outgoing, cuts, key):
    from gen.card import parse_card
    from gen.errors import CardError

    with pytest.raises(CardError) as err:
        parse_card(_card(outgoing, cuts))
    assert key in str(err.value)


def test_card_limits_of_the_automatic_models():
    from gen.card import parse_card
    from gen.errors import CardError

    with pytest.raises(CardError, match="2 to 6"):
        parse_card(_card(["mu-", "mu+"] + ["gamma"] * 5, "pt_min = 5.0\npair_mass_min = 5.0"))
    with pytest.raises(CardError, match="automatic amplitudes only"):
        parse_card(_card(["mu-", "mu+"], model="electroweak", extra='helicities = "sample"'))
    with pytest.raises(CardError, match="treats mu- as massless"):
        parse_card(_card(["mu-", "mu+"]) + "[parameters.masses]\nmu- = 0.1\n")
    with pytest.raises(CardError, match="up to six"):
        parse_card(_card(["mu-", "mu+", "gamma", "gamma"], model="qed", sqrt_s=10.0))


def test_a_run_reproduces_the_library_cross_section(tmp_path):
    """sigma(e+e- -> mu+mu-) near the Z with an angular cut, automatic amplitudes against the
    hand-coded electroweak model (its sigma checked against the published line shape in
    tests/test_cross_sections.py): phase space, flux and units of the new process class."""
    from gen.cli import main

    from gen.records.store import read_run

    out = {}
    for model in ("standard", "electroweak"):
        card = tmp_path / f"{model}.toml"
        card.write_text(_card(["mu-", "mu+"], "theta_min_deg = 20.0\ntheta_max_deg = 160.0", model=model,
                              sqrt_s=91.0).replace("points_per_iteration = 2000", "points_per_iteration = 20000"))
        assert main(["run", str(card), "-o", str(tmp_path / model)]) == 0
        out[model] = read_run(tmp_path / model / "unweighted.parquet")["cross_section"]["total"]
    (a, ea), (b, eb) = ((out[m]["value"], out[m]["error"]) for m in ("standard", "electroweak"))
    assert abs(a - b) < 4.0 * math.hypot(ea, eb)
    assert ea < 0.01 * a


def test_identical_photons_carry_the_symmetry_factor(tmp_path):
    """e+e- -> gamma gamma: the automatic process derives the factor 1/2 of identical photons and
    its sigma matches the hand-coded QED one (Peskin & Schroeder (1995), sec. 5.5)."""
    from gen.cli import main
    from gen.records.store import read_run

    out = {}
    for model in ("qed-tree", "qed"):
        card = tmp_path / f"{model}.toml"
        card.write_text(_card(["gamma", "gamma"], "theta_min_deg = 20.0\ntheta_max_deg = 160.0", model=model,
                              sqrt_s=10.0).replace("points_per_iteration = 2000", "points_per_iteration = 20000"))
        assert main(["run", str(card), "-o", str(tmp_path / model)]) == 0
        out[model] = read_run(tmp_path / model / "unweighted.parquet")
    assert out["qed-tree"]["process"]["symmetry_factor"] == 0.5
    (a, ea), (b, eb) = ((out[m]["cross_section"]["total"]["value"], out[m]["cross_section"]["total"]["error"])
                        for m in ("qed-tree", "qed"))
    assert abs(a - b) < 4.0 * math.hypot(ea, eb)


def test_the_channel_set_does_not_change_the_cross_section():
    """Multi-channel sampling is unbiased for any channel set (Kleiss & Pittau, Comput. Phys.
    Commun. 83 (1994) 141): e+e- -> mu+mu- gamma with all channels and with the first alone, by
    plain Monte Carlo on the same integrand."""
    from gen.card import parse_card
    from gen.physics.channels import MultiChannel
    from gen.processes import build_process

    cfg = parse_card(_card(["mu-", "mu+", "gamma"], "pt_min = 5.0\npair_mass_min = 5.0"))
    proc = build_process(cfg, checks=False)
    assert proc.phase.k > 1
    rng = np.random.default_rng(3)
    results = []
    for phase in (proc.phase, MultiChannel(proc.phase.topologies[:1])):
        proc.phase = phase
        w = np.concatenate([proc.weights(rng.random((20000, phase.ndim))) for _ in range(10)])
        results.append((w.mean(), w.std() / math.sqrt(w.size)))
    (a, ea), (b, eb) = results
    assert abs(a - b) < 4.0 * math.hypot(ea, eb)
    assert ea < 0.05 * a


def test_the_run_record_reports_each_channel(tmp_path):
    """The record's per-channel figures mean what they say (the channel weights and the density
    shares alpha_i g_i / sum_j alpha_j g_j of Kleiss & Pittau, Comput. Phys. Commun. 83 (1994) 141):
    the adapted weight is the share of points the stored map sends to the channel, and the share
    of sigma each channel covers does not depend on the map (plain Monte Carlo as the reference)."""
    import vegas

    from gen.card import load_card, parse_card
    from gen.cli import main
    from gen.processes import build_process
    from gen.records.store import read_run

    text = _card(["mu-", "mu+", "gamma"], "pt_min = 5.0\npair_mass_min = 5.0")
    card = tmp_path / "radiative.toml"
    card.write_text(text)
    assert main(["run", str(card), "-o", str(tmp_path / "out")]) == 0
    rec = read_run(tmp_path / "out" / "unweighted.parquet")
    chans = rec["grid"]["channels"]
    proc = build_process(parse_card(text), checks=False)
    assert len(chans) == proc.phase.k > 1
    assert sum(c["weight"] for c in chans) == pytest.approx(1.0, abs=1e-12)
    assert sum(c["covers"] for c in chans) == pytest.approx(1.0, abs=1e-9)

    from gen.sampling.grid import make_grid

    grid = make_grid(proc, load_card(card))  # the run's grid again: same card, same seed
    assert grid.checksum == rec["grid"]["checksum"]
    nodes = grid.nodes
    y = np.random.default_rng(5).random((40000, len(nodes)))
    x, jac = np.empty_like(y), np.empty(y.shape[0])
    vegas.AdaptiveMap([list(n) for n in nodes]).map(y, x, jac)
    drawn = np.bincount(np.minimum((x[:, 0] * proc.phase.k).astype(int), proc.phase.k - 1), minlength=proc.phase.k)
    for c, n in zip(chans, drawn):
        f = n / y.shape[0]
        assert abs(f - c["weight"]) < 4.0 * math.sqrt(f * (1 - f) / y.shape[0]) + 1e-3

    u = np.random.default_rng(6).random((200000, proc.phase.ndim))
    w = proc.weights(u)
    live = w > 0
    share = w[live, None] * proc.phase.shares(proc.phase.generate(u[live], proc.sqrt_s)[0], proc.sqrt_s)
    plain = share.sum(axis=0) / w.sum()
    err = np.sqrt(((share / w.mean() - plain * (w[live, None] / w.mean())) ** 2).sum(axis=0)) / w.size
    for c, ref, e in zip(chans, plain, err):
        assert abs(c["covers"] - ref) < 5.0 * e + 0.02  # the record's estimate uses 4000 points


def test_event_colour_flows_conserve_colour(tmp_path):
    """Every colour tag of an e+e- -> q qbar g g event appears once as a colour and once as an
    anticolour among the outgoing partons (colour conservation; common practice, no source), and
    both leading-colour flows occur."""
    import pyarrow.parquet as pq

    from gen.cli import main

    card = tmp_path / "four.toml"
    card.write_text(_card(["u", "ubar", "g", "g"], "pair_mass_min = 10.0\npt_min = 5.0\nenergy_min = 5.0"))
    assert main(["run", str(card), "-o", str(tmp_path / "run")]) == 0
    t = pq.read_table(tmp_path / "run" / "unweighted.parquet").to_pylist()
    seen = set()
    for ev in t[:200]:
        parts = [q for q in ev["particles"] if q["role"] == "outgoing"]
        cols = sorted(q["colour"] for q in parts if q["colour"])
        antis = sorted(q["anticolour"] for q in parts if q["anticolour"])
        assert cols == antis and len(cols) == 3
        seen.add(tuple((q["colour"], q["anticolour"]) for q in parts))
    assert len(seen) >= 2


# --- model files ---------------------------------------------------------------------------

@pytest.mark.parametrize("change, message", [
    (('form = "fermion-vector"\nleft = "-e*Q(f)"', 'form = "fermion-vectr"\nleft = "-e*Q(f)"'), "form"),
    (('legs = ["~f", "f", "gamma"]', 'legs = ["~f", "f", "W+"]'), "charge"),
    (('legs = ["W-", "W+", "gamma"]', 'legs = ["W-", "W+", "g"]'), "colour"),
    (('"e-" = {}', '"e-" = { spin = 1 }'), "unknown keys"),
])
def test_a_broken_model_file_is_refused(tmp_path, change, message):
    """The model-file reader checks forms, conservation, colour and expressions (its contract in
    DEVELOPERS.md; common practice, no source)."""
    text = (ROOT / "gen/physics/tree/standard.toml").read_text()
    assert change[0] in text
    path = tmp_path / "broken.toml"
    path.write_text(text.replace(change[0], change[1], 1))
    with pytest.raises(ModelFileError, match=message):
        m = load(str(path))
        m.numeric(dict(MODELS["electroweak"].resolve({}), alpha_s=0.118), "fixed", lambda f: 1.0)


def test_the_model_files_agree_with_the_particle_table():
    """Every vertex of the shipped files conserves charge and has legs of the spins its form needs
    (checked on reading); the file is valid TOML of our own sections."""
    for name in ("standard", "qed-tree", "scalar-tree"):
        tm = load(name)
        assert tm.vertices
        doc = tomllib.loads(Path(tm.path).read_text())
        assert set(doc) <= {"about", "derived", "derived_complex_mass", "particles", "vertex"}


def test_complex_masses_leave_a_gauge_invariant_amplitude():
    """e+e- -> mu- nubar u dbar gamma (W lines internal): the photon's Ward identity holds to
    rounding in the complex-mass scheme and fails at O(Gamma_W/m_W) with fixed widths (Denner,
    Dittmaier, Roth & Wackeroth, Nucl. Phys. B 560 (1999) 33; from memory)."""
    worst = {}
    for scheme in ("fixed", "complex_mass"):
        amp = build("standard", ["e-", "e+"], ["mu-", "nu_mubar", "u", "dbar", "gamma"], given={"width_scheme": scheme})
        assert amp.complex_mass == (scheme == "complex_mass")
        p = amp.probe_momenta(9, 3)
        ext, moms = amp._externals(p), amp._moms(p)
        w = 0.0
        for h in amp.helicity_configs:
            for cols, _ in amp.colour_classes:
                normal = np.abs(amp._amp(ext, moms, h, cols, {}))
                shifted = dict(ext)
                shifted[(6, h[6])] = p[:, 6, :].T.astype(complex)
                ward = np.abs(amp._amp(shifted, moms, h, cols, {}))
                w = max(w, float((ward / (normal.max() * p[:, 6, 0])).max()))
        worst[scheme] = w
    assert worst["complex_mass"] < 1e-12
    assert worst["fixed"] > 1e-4


# --- helicities in the record ------------------------------------------------------------------

def test_sampled_helicities_are_physical_helicities():
    """With sampled helicities each event carries the helicities drawn in proportion to their |M|^2:
    in e+e- -> nu_e nubar_e the neutrino is always left-handed and the antineutrino right-handed,
    and massless e- e+ annihilate with opposite helicities (V - A and helicity conservation of vector
    couplings, common practice, no source)."""
    from gen.card import parse_card
    from gen.processes import build_process

    proc = build_process(parse_card(_card(["nu_e", "nu_ebar"], sqrt_s=200.0, extra='helicities = "sample"')))
    x = np.random.default_rng(0).random((3000, proc.ndim))
    h = proc.events(x, np.random.default_rng(1)).helicity
    assert np.all(h[:, 2] == -0.5) and np.all(h[:, 3] == 0.5)
    assert np.all(h[:, 0] == -h[:, 1]) and 0.05 < np.mean(h[:, 0] > 0) < 0.5


def test_helicities_at_the_z_pole_follow_the_electron_asymmetry(tmp_path):
    """e+e- -> mu- mu+ at the Z pole with sampled helicities, through a run and its file: the share of
    left-handed electrons is (1 + A_e)/2 with A_e = 2 g_V g_A / (g_V^2 + g_A^2), g_V = -1/2 + 2 sw2,
    g_A = -1/2 (PDG review "Electroweak model and constraints on new physics"; from memory), within
    4 sigma plus 0.005 for the photon; summed helicities leave the field null."""
    import pyarrow.parquet as pq

    from gen.card import parse_card
    from gen.jobs.run import run
    from gen.records.store import read_run

    text = _card(["mu-", "mu+"], sqrt_s=91.1876, extra='helicities = "sample"').replace("events = 200", "events = 20000")
    run(parse_card(text), tmp_path / "hel")
    parts = pq.read_table(tmp_path / "hel" / "unweighted.parquet").column("particles").combine_chunks().flatten()
    h = parts.field("helicity").to_numpy(zero_copy_only=False).reshape(-1, 4)
    f_left = float(np.mean(h[:, 0] < 0))
    sw2 = read_run(tmp_path / "hel" / "unweighted.parquet")["parameters"]["model"]["sw2"]
    gv, ga = -0.5 + 2 * sw2, -0.5
    ref = 0.5 * (1 + 2 * gv * ga / (gv * gv + ga * ga))
    err = math.sqrt(ref * (1 - ref) / h.shape[0])
    assert abs(f_left - ref) < 4 * err + 0.005, (f_left, ref, err)
    run(parse_card(_card(["mu-", "mu+"], sqrt_s=91.1876)), tmp_path / "sum")
    col = pq.read_table(tmp_path / "sum" / "unweighted.parquet").column("particles").combine_chunks().flatten()
    assert col.field("helicity").null_count == len(col)


# --- the colour-ordered path for gluons ----------------------------------------------------------

def test_colour_ordered_gluons_equal_the_colour_dressed_recursion():
    """g g -> g g by colour-ordered currents with the colour matrix of the reduced basis equals the
    recursion with explicit SU(3) colour matrices and the exact colour sum, to 1e-10 (two
    evaluations of the same Feynman rules; the colour-dressed one is checked against Ellis, Stirling
    & Webber Table 7.1 by the library test above), also with alpha_s given per point."""
    fast = build("standard", ["g", "g"], ["g", "g"], given=PURE_QCD)
    slow = build("standard", ["g", "g"], ["g", "g"], given=PURE_QCD, colours="sum", colour_ordered=False)
    assert fast.ordered is not None and slow.ordered is None and len(fast.ordered.orderings) == 2
    p = fast.probe_momenta(11, 5)
    np.testing.assert_allclose(fast.squared(p), slow.squared(p), rtol=1e-10)
    a = np.full(5, 0.2)
    np.testing.assert_allclose(fast.squared(p, alpha_s=a), slow.squared(p) * (0.2 / 0.118) ** 2, rtol=1e-10)


def test_colour_ordered_five_gluons_against_the_published_sum():
    """g g -> g g g by the colour-ordered path at several points against the exact colour and
    helicity sum g^6 N^3 (N^2 - 1) sum_{sigma in S_5/Z_5} 2 sum_{i<j} s_ij^4 / prod |s_{sigma_k sigma_k+1}|
    (Parke & Taylor 1986; no subleading colour for n <= 5, Dixon hep-ph/9601359, sec. 4), to 1e-10."""
    import itertools

    amp = build("standard", ["g", "g"], ["g", "g", "g"], given=PURE_QCD)
    assert amp.ordered is not None and len(amp.ordered.orderings) == 6
    p = amp.probe_momenta(12, 4)
    got = amp.squared(p) / amp.average
    gs2 = 4.0 * math.pi * 0.118
    for k in range(4):
        q = [(p[k, i] if i >= 2 else -p[k, i]) for i in range(5)]

        def s(i, j):
            return abs(2.0 * dot(q[i], q[j]))

        num = sum(s(i, j) ** 4 for i, j in itertools.combinations(range(5), 2))
        ring = sum(1.0 / math.prod(s(o[m], o[(m + 1) % 5]) for m in range(5))
                   for o in [(0,) + r for r in itertools.permutations(range(1, 5))])
        assert got[k] == pytest.approx(gs2 ** 3 * 27.0 * 8.0 * 2.0 * num * ring, rel=1e-10)


@pytest.mark.parametrize("n", [4, 5, 6, pytest.param(7, marks=pytest.mark.slow)])
def test_colour_ordered_gluon_path_is_parke_taylor(n):
    """Every trace-basis amplitude of the colour-ordered path (the reduced ones and those the
    Kleiss-Kuijf matrix gives) is |A(sigma; MHV)| = s_ij^2 / prod |s_k,k+1|^(1/2) at unit coupling
    (Parke & Taylor 1986; Dixon, hep-ph/9601359), to 1e-9."""
    import itertools

    amp = build("standard", ["g", "g"], ["g"] * (n - 2))
    p = amp.probe_momenta(4, 2)
    ext, moms = amp._externals(p), amp._moms(p)
    q = [(p[:, i] if i >= 2 else -p[:, i]) for i in range(n)]
    for minus in list(itertools.combinations(range(n), 2))[:4]:
        h_out = [-1 if i in minus else 1 for i in range(n)]
        hels = [-h if i < 2 else h for i, h in enumerate(h_out)]
        a = amp.ordered.trace_amplitudes(amp._ordered_amps(ext, moms, hels))
        for row, order in zip(a, amp.ordered.trace_orderings):
            ring = list(order) + [n - 1]
            den = np.prod([np.abs(2 * dot(q[ring[k]], q[ring[(k + 1) % n]])) for k in range(n)], axis=0)
            ref = np.abs(2 * dot(q[minus[0]], q[minus[1]])) ** 2 / np.sqrt(den)
            np.testing.assert_allclose(np.abs(row), ref, rtol=1e-9)


def test_gluon_events_get_ring_flows(tmp_path):
    """Events of g g -> g g g at fixed beams: every colour tag is used once as a colour and once as
    an anticolour along the ring of the drawn ordering (colour conservation, common practice, no
    source), and several orderings occur."""
    from gen.card import parse_card
    from gen.processes import build_process

    lines = ["[process]", 'model = "standard"', 'incoming = ["g", "g"]', 'outgoing = ["g", "g", "g"]',
             "[collider]", "sqrt_s = 500.0", "[cuts]", "pt_min = 20.0", "pair_mass_min = 20.0",
             "[sampling]", "events = 10"]
    proc = build_process(parse_card("\n".join(lines) + "\n", "ggg.toml"))
    x = np.random.default_rng(5).random((600, proc.ndim))
    x = x[proc.weights(x) > 0][:300]
    ev = proc.events(x, np.random.default_rng(6))
    col, anti = ev.colour, ev.anticolour
    for c, a in zip(col, anti):
        tags = sorted(set(c) | set(a))
        assert tags == [1, 2, 3, 4, 5]
        for t in tags:  # incoming: colour in; outgoing: colour out
            assert (c[:2] == t).sum() + (a[2:] == t).sum() == (a[:2] == t).sum() + (c[2:] == t).sum()
    assert len({tuple(r) for r in np.concatenate([col, anti], axis=1).tolist()}) >= 6


def test_gluon_helicities_in_the_record_cover_both_parity_halves():
    """g g -> g g with sampled helicities: every event's helicities are a configuration with a
    non-zero amplitude, and each configuration and its parity image (all helicities flipped, the
    same |M|^2 for massless QCD; common practice, no source) occur about equally often."""
    from gen.card import parse_card
    from gen.processes import build_process

    lines = ["[process]", 'model = "standard"', 'incoming = ["g", "g"]', 'outgoing = ["g", "g"]', 'helicities = "sample"',
             "[collider]", "sqrt_s = 500.0", "[cuts]", "pt_min = 20.0", "[sampling]", "events = 10"]
    proc = build_process(parse_card("\n".join(lines) + "\n", "gg.toml"))
    x = np.random.default_rng(2).random((4000, proc.ndim))
    h = proc.events(x[proc.weights(x) > 0], np.random.default_rng(3)).helicity
    allowed = {tuple(float(v) for v in c) for c in proc.amplitude.helicity_configs}
    assert {tuple(r) for r in h.tolist()} <= allowed
    first = np.array([tuple(r) <= tuple(-v for v in r) for r in h.tolist()])
    assert abs(first.mean() - 0.5) < 4 * math.sqrt(0.25 / first.size)
