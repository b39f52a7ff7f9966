"""Hadron collisions: parton densities times parton-level |M|^2, summed over every subprocess.

`HadronCollision` is the integrand of a card with two hadron beams (p, pbar).

Integration variables (2 -> 2, three dimensions): tau = x1 x2 (a Breit-Wigner map in s-hat when the
process has an s-channel resonance inside the allowed mass range, else a logarithmic map), the
rapidity y of the parton system (flat within |y| <= -ln(tau)/2) and cos(theta*) of the first
outgoing particle in the parton centre-of-mass frame (flat, or following the 1/t and 1/u poles of
massless exchange within the range a transverse-momentum cut leaves). Two massless particles with a
p_T cut and no resonance are sampled instead in p_T^2 and their two rapidities, within the cuts
(see `_pt_rapidity_kinematics`). A 2 -> 1 process (gluon
fusion to a Higgs boson) is taken in the narrow-width limit, with y its only variable.

    sigma = sum_i int dtau dy dcos  f_a(x1, mu_F) f_b(x2, mu_F) |M_i|^2(mu_R) / (2 s-hat)
            * p* / (8 pi sqrt(s-hat)) * S_i        (S_i: identical-particle factor)

The subprocesses are all parton processes the card's particles or groups allow. At every point
the integrand is their sum; an event's subprocess is then drawn in proportion to the terms of that
sum, so the subprocesses appear in proportion to their cross-sections. |M|^2 is evaluated once per
distinct function and orientation (an "evaluation"); parton luminosities come from one
interpolation of all flavours. Partons, leptons and photons are massless in hadron collisions
(the five-flavour scheme); t, W, Z and H keep their masses.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..card import CUT_DEFAULTS, MASSIVE_IN_HADRON_COLLISIONS, RunConfig
from ..errors import CardError, UserError
from ..physics import pdf as _pdf
from ..physics.constants import HBARC2_PB
from ..physics.kinematics import (AngularMap, BreitWignerMap, PowerMap, boost_z, mandelstam_tu, rapidity_of,
                                  two_body_momentum)
from ..physics.matrix.registry import choose_flows, draw_index, flow_tags
from ..physics.particles import HADRON_PARTONS, species
from ..physics.quadrature import legendre_grid
from ..physics.references import REFERENCES
from . import observables
from .base import particle_widths
from .cuts import Cuts
from .interface import CannotValidate, Channel, EventData, ParticleLayout, Process, ValidationPlan

__all__ = ["HadronCollision"]

#: points per internal step: bounds the (subprocesses x points) arrays of event selection
_STEP = 8192


@dataclass
class _PointTerms:
    """Everything a batch of points needs: parton kinematics, scales, couplings, densities, |M|^2."""

    x1: np.ndarray
    x2: np.ndarray
    shat: np.ndarray
    c: np.ndarray  # cos theta* of the card's first outgoing particle against beam 1's parton
    t: np.ndarray  # (p_a - p_3)^2 in card order, a = the parton of beam 1
    u: np.ndarray
    mu_r: np.ndarray
    mu_f: np.ndarray
    alpha_s: np.ndarray
    f1: np.ndarray  # (partons, N): f(x1, mu_F) of each parton of beam 1
    f2: np.ndarray
    me: np.ndarray  # (evaluations, N)
    norm: np.ndarray  # flux, phase space and Jacobian (pb per |M|^2 and luminosity)


def coloured_slot(subprocesses, k: int) -> bool:
    """Whether outgoing slot k holds a coloured particle (the same in every subprocess of a card)."""
    return species(subprocesses[0].outgoing[k]).colour != 1


def jet_and_boson_scales(choice: str, cm: np.ndarray, coloured: np.ndarray) -> np.ndarray:
    """boson_mt (sqrt(E^2 - p_z^2) of the colourless outgoing particles together) or jets_pt_mean
    (the geometric mean of the coloured ones' p_T) per point, from momenta cm (N, n, 4) in any
    frame boosted along the beams (both are invariant under such boosts)."""
    if choice == "boson_mt":
        sys_ = cm[:, ~coloured].sum(axis=1)
        return np.sqrt(np.clip(sys_[:, 0] ** 2 - sys_[:, 3] ** 2, 0.0, None))
    pt = np.hypot(cm[:, coloured, 1], cm[:, coloured, 2])
    return np.exp(np.log(np.maximum(pt, 1e-300)).mean(axis=1))


class HadronCollision(Process):
    """A card with hadron beams as one integrand over its subprocesses."""

    def __init__(self, cfg: RunConfig):
        res = cfg.resolved
        self.cfg = cfg
        self.params = dict(res.parameters)
        self.subprocesses = res.subprocesses
        self.n_out = len(cfg.outgoing)
        self.channels = (Channel("tau, y, cos theta*", 3) if self.n_out == 2 else Channel("y", 1),)
        self.species = tuple(cfg.incoming) + tuple(cfg.outgoing)
        self.masses = tuple(res.masses[:len(self.species)])
        self.m_out = self.masses[2:]
        self.labels = tuple(sub.label for sub in self.subprocesses)
        self.beam1, self.beam2 = (np.array(b, float) for b in res.beams)
        self.s = 4.0 * self.beam1[0] * self.beam2[0]
        self.sqrt_s = math.sqrt(self.s)
        #: rapidity of the hadrons' centre-of-mass frame: y_lab = y + y_beams
        self.y_beams = rapidity_of(self.beam1[0] + self.beam2[0], self.beam1[3] + self.beam2[3])
        part = cfg.partons
        try:
            self.pdf = _pdf.load(res.parton_set.folder, part["member"])
        except UserError as exc:
            raise CardError(cfg.source, "partons.set", str(exc)) from None
        if part["alpha_s"] == "set":
            self.alpha_s = self.pdf.alpha_s.tabulated()
        else:
            self.alpha_s = _pdf.AlphaS(alpha_ref=part["alpha_s_mz"], loops=1 if part["alpha_s"] == "one_loop" else 2,
                                       thresholds=(self.pdf.info.get("MCharm", 1.4), self.pdf.info.get("MBottom", 4.75),
                                                   self.pdf.info.get("MTop", 172.5))).tabulated()
        self.alpha_em = float(self.params.get("alpha", 0.0))
        self.cuts = Cuts(cfg)
        self._index_subprocesses()
        self._set_up_phase_space()

    # --- set-up ------------------------------------------------------------------------------
    def _index_subprocesses(self) -> None:
        """Parton ids, the distinct |M|^2 evaluations, the luminosity coefficients and the flows."""
        subs = self.subprocesses
        keys: dict[tuple, int] = {}
        #: (spec, t <-> u swapped, out_perm) of each distinct |M|^2 evaluation
        self.evaluations: list[tuple] = []
        self.sub_evaluation = np.empty(len(subs), np.int64)
        for i, sub in enumerate(subs):
            key = (id(sub.spec.matrix), sub.t_u_swapped, sub.out_perm)
            if key not in keys:
                keys[key] = len(self.evaluations)
                self.evaluations.append((sub.spec, sub.t_u_swapped, sub.out_perm))
            self.sub_evaluation[i] = keys[key]
        self._luminosity_tables()
        self.strong = max(sub.spec.strong_order for sub in subs) > 0
        # the default scale: half_ht when coloured or massive particles come out, else the pair mass
        heavy = any(species(p).colour != 1 or p in MASSIVE_IN_HADRON_COLLISIONS for sub in subs for p in sub.outgoing)
        self.auto_scale = "half_ht" if heavy and self.n_out == 2 else "sqrt_shat"
        # colour: subprocesses sharing flows and orderings share tags in card order
        n = 2 + self.n_out
        self.flow_groups: list[tuple[tuple, np.ndarray, bool]] = []  # flows, their tags, t <-> u swapped
        group_of: dict[tuple, int] = {}
        self.sub_flow_group = np.empty(len(subs), np.int64)
        for i, sub in enumerate(subs):
            flows = sub.spec.colour_flows
            key = (id(flows), sub.in_perm, sub.out_perm)
            if key not in group_of:
                group_of[key] = len(self.flow_groups)
                self.flow_groups.append((flows, flow_tags(flows, sub.canonical, n), sub.t_u_swapped))
            self.sub_flow_group[i] = group_of[key]
        # slots that may be shuffled: the same name in the card
        names_out = [p.name for p in self.cfg.outgoing]
        self.shuffle = self.n_out == 2 and names_out[0] == names_out[1]

    def _luminosity_tables(self) -> None:
        """The beams' parton indices, symmetry factors and luminosity coefficients of the
        subprocesses, once `self.evaluations` and `self.sub_evaluation` are set."""
        names = HADRON_PARTONS["p"]
        sign = {"p": 1, "pbar": -1}
        b1, b2 = (p.name for p in self.cfg.incoming)
        # x f of parton `name` in beam `b` is x f of PDG id sign * pdg in the proton
        self.pids1 = [sign[b1] * species(n).pdg if species(n).is_quark else 21 for n in names]
        self.pids2 = [sign[b2] * species(n).pdg if species(n).is_quark else 21 for n in names]
        subs = self.subprocesses
        self.sub_parton1 = np.array([names.index(sub.partons[0]) for sub in subs], np.int64)
        self.sub_parton2 = np.array([names.index(sub.partons[1]) for sub in subs], np.int64)
        self.sub_symmetry = np.array([sub.spec.symmetry for sub in subs])
        self.sub_pdg = np.array([[species(p).pdg for p in sub.partons + sub.outgoing] for sub in subs], np.int32)
        # the luminosity sum sum_k |M_k|^2 sum_(a,b) C_k,ab f1_a f2_b in the cheaper of two forms: over the
        # parton pairs that occur (Drell-Yan: 10 pairs) or, when most pairs occur (dijets: 121), as one
        # matrix product of the coefficient rows with f2 (measured in gen.benchmark --hadron)
        n_names = len(names)
        coeff = np.zeros((len(self.evaluations), n_names, n_names))
        np.add.at(coeff, (self.sub_evaluation, self.sub_parton1, self.sub_parton2), self.sub_symmetry)
        self.coeff_rows = coeff.reshape(-1, n_names)
        pairs = sorted(set(zip(self.sub_parton1.tolist(), self.sub_parton2.tolist())))
        self.pair_a = np.array([a for a, _ in pairs], np.int64)
        self.pair_b = np.array([b for _, b in pairs], np.int64)
        self.pair_coeff = coeff[:, self.pair_a, self.pair_b]  # (evaluations, pairs that occur)
        self.by_pairs = len(pairs) <= 2 * n_names

    def _set_up_phase_space(self) -> None:
        res = self.cfg.resolved
        specs = [sub.spec for sub in self.subprocesses]
        if self.n_out == 1:
            self.m_res = float(self.params[specs[0].resonance[0]])
            self.tau_fixed = self.m_res**2 / self.s
            return
        self.shat_min, self.shat_max = res.shat_range
        # the common p_T of two outgoing particles: the tighter of their cuts, in any table
        self.pt_min = max(self.cuts.lower("pt_min", k) for k in range(self.n_out))
        self.poles = "both" if any(s.poles != "none" for s in specs) else "none"
        self.pole_power = max((s.pole_power for s in specs if s.poles != "none"), default=2)
        # a Breit-Wigner map when every subprocess has the same s-channel resonance inside the range
        self.shat_map = PowerMap(1.0)
        resonances = {s.resonance for s in specs}
        if len(resonances) == 1 and None not in resonances:
            mname, wname = resonances.pop()
            m, w = float(self.params[mname]), float(self.params[wname])
            if w > 0 and self.shat_min < m * m < self.shat_max:
                self.shat_map = BreitWignerMap(m, w)
        # massless pairs with a p_T cut and no resonance: p_T^2 and the two rapidities, whose ranges
        # are the cuts themselves, so that no point is spent outside them
        self.pt_rapidities = (self.pt_min > 0 and all(m == 0.0 for m in self.m_out)
                              and not isinstance(self.shat_map, BreitWignerMap))
        if self.pt_rapidities:
            self.y_ranges = self.rapidity_ranges()
            self.channels = (Channel("p_T^2, y3, y4", 3),)

    def rapidity_ranges(self) -> list[tuple[float, float]]:
        """The rapidity range (in the hadrons' frame) of each of two outgoing particles with a p_T
        cut: as far as x <= 1 allows at the cut (acosh(sqrt(s) / 2 m_T)), narrowed to the card's
        rapidity cut, and for a massless particle its pseudorapidity cut, where they apply."""
        out = []
        for i, m in enumerate(self.m_out):
            y = math.acosh(max(self.sqrt_s / (2.0 * math.hypot(m, self.pt_min)), 1.0))
            y = min(y, self.cuts.upper("rapidity_max", i), self.cuts.upper("eta_max", i) if m == 0.0 else math.inf)
            out.append((-y - self.y_beams, y - self.y_beams))  # the cuts are on laboratory rapidities
        return out

    # --- kinematics --------------------------------------------------------------------------
    def _parton_kinematics(self, x):
        """(x1, x2, s-hat, cos, 1 - cos, 1 + cos, Jacobian in tau, y and cos) of points x."""
        n = x.shape[0]
        if self.n_out == 1:
            tau = np.full(n, self.tau_fixed)
            ylim = -0.5 * math.log(self.tau_fixed)
            y = ylim * (2.0 * x[:, 0] - 1.0)
            jac = np.full(n, 2.0 * ylim)
            c = np.zeros(n)
            omc = opc = np.ones(n)
        elif self.pt_rapidities:
            return self._pt_rapidity_kinematics(x)
        else:
            shat, jac_s = self.shat_map(x[:, 0], self.shat_min, self.shat_max)
            tau = shat / self.s
            ylim = -0.5 * np.log(tau)
            y = ylim * (2.0 * x[:, 1] - 1.0)
            jac = jac_s / self.s * 2.0 * ylim
            pstar = two_body_momentum(np.sqrt(shat), *self.m_out)
            if self.pt_min > 0:
                cmax = np.sqrt(np.clip(1.0 - (self.pt_min / pstar) ** 2, 0.0, 1.0))
            else:
                cmax = np.ones_like(shat)
            c, omc, opc, dc = AngularMap(self.poles, self.pole_power, 0.0, -cmax, cmax).with_complements(x[:, 2])
            jac = jac * dc
        sq = np.sqrt(tau)
        ey = np.exp(y)
        return sq * ey, sq / ey, tau * self.s, c, omc, opc, jac

    def _pt_rapidity_kinematics(self, x):
        """The same for a massless pair from p_T^2 (density ~ p_T^-4), y3 and y4 (flat):
        x1,2 = p_T (e^(+-y3) + e^(+-y4)) / sqrt(s), cos theta* = tanh((y3 - y4)/2), and
        dtau dy dcos = 2 x1 x2 / s-hat dp_T^2 dy3 dy4 (the two-jet cross-section of Ellis, Stirling &
        Webber (1996), ch. 7, from memory; dcos = 2 dt / s-hat). Points beyond x = 1 or the card's pair-mass range weigh nothing."""
        q, jac_q = PowerMap(2.0)(x[:, 0], self.pt_min ** 2, self.s / 4.0)
        (a3, b3), (a4, b4) = self.y_ranges
        y3 = a3 + (b3 - a3) * x[:, 1]
        y4 = a4 + (b4 - a4) * x[:, 2]
        pt_ = np.sqrt(q)
        x1 = pt_ * (np.exp(y3) + np.exp(y4)) / self.sqrt_s
        x2 = pt_ * (np.exp(-y3) + np.exp(-y4)) / self.sqrt_s
        shat = x1 * x2 * self.s
        half = 0.5 * (y3 - y4)
        c = np.tanh(half)
        omc, opc = 2.0 / (1.0 + np.exp(2.0 * half)), 2.0 / (1.0 + np.exp(-2.0 * half))
        jac = 2.0 * jac_q * (b3 - a3) * (b4 - a4) / self.s
        inside = (x1 < 1.0) & (x2 < 1.0) & (shat >= self.shat_min) & (shat <= self.shat_max)
        jac = np.where(inside, jac, 0.0)
        x1, x2 = np.where(inside, x1, 0.5), np.where(inside, x2, 0.5)  # harmless values where nothing is weighed
        return x1, x2, x1 * x2 * self.s, c, omc, opc, jac

    def _outgoing(self, shat, c, phi, x1, x2, sin=None):
        """Laboratory momenta (N, n, 4) of the outgoing particles in card order."""
        n = shat.shape[0]
        rs = np.sqrt(shat)
        if self.n_out == 1:
            out = np.zeros((n, 1, 4))
            out[:, 0, 0] = rs
        else:
            m3, m4 = self.m_out
            pstar = two_body_momentum(rs, m3, m4)
            e3 = (shat + m3 * m3 - m4 * m4) / (2.0 * rs)
            sin = np.sqrt(np.clip(1.0 - c * c, 0.0, None)) if sin is None else sin
            out = np.empty((n, 2, 4))
            out[:, 0, 0] = e3
            out[:, 0, 1] = pstar * sin * np.cos(phi)
            out[:, 0, 2] = pstar * sin * np.sin(phi)
            out[:, 0, 3] = pstar * c
            out[:, 1, 0] = rs - e3
            out[:, 1, 1:] = -out[:, 0, 1:]
        # from the parton frame to the laboratory: rapidity y_lab = y + y_beams = ln(x1/x2)/2 + y_beams
        return boost_z(out, 0.5 * np.log(x1 / x2) + self.y_beams)

    def _scale(self, choice, shat, kin):
        """A scale (GeV) per point: fixed, or dynamic from the points' kinematics `kin` (floored at
        1 GeV, where pt -> 0 would leave none)."""
        f = self.cfg.scales["factor"]
        if not isinstance(choice, str):
            return np.full(shat.shape, float(choice) * f)
        if choice == "auto":
            choice = self.auto_scale
        mu = np.sqrt(shat) if choice == "sqrt_shat" else self._dynamic_scale(choice, shat, kin)
        return np.maximum(mu * f, 1.0)

    def _dynamic_scale(self, choice, shat, sin):
        """pt, half_ht, boson_mt or jets_pt_mean (GeV) per point of a 2 -> 2, from sin theta*: both
        particles have the same p_T; two colourless ones make a system of mass sqrt(s-hat) at rest
        in the transverse plane."""
        pt = two_body_momentum(np.sqrt(shat), *self.m_out) * sin
        if choice in ("pt", "jets_pt_mean"):
            return pt
        if choice == "boson_mt":
            blind = [not coloured_slot(self.subprocesses, k) for k in range(2)]
            if all(blind):
                return np.sqrt(shat)
            m = self.m_out[blind.index(True)]
            return np.sqrt(m * m + pt * pt)
        return 0.5 * sum(np.sqrt(m * m + pt * pt) for m in self.m_out)

    def _point_terms(self, x) -> _PointTerms:
        x1, x2, shat, c, omc, opc, jac = self._parton_kinematics(x)
        sin = np.sqrt(np.clip(omc * opc, 0.0, None))
        mu_r = self._scale(self.cfg.scales["renormalization"], shat, sin)
        mu_f = self._scale(self.cfg.scales["factorization"], shat, sin)
        a_s = self.alpha_s(mu_r)
        f1 = self.pdf.xfx_many(self.pids1, x1, mu_f) / x1
        f2 = self.pdf.xfx_many(self.pids2, x2, mu_f) / x2
        par = dict(self.params, alpha_s=a_s, m1=0.0, m2=0.0)
        if self.n_out == 2:
            m3, m4 = self.m_out
            t, u = mandelstam_tu(shat, 0.0, 0.0, m3, m4, omc, opc)
            me = np.empty((len(self.evaluations), shat.size))
            for k, (spec, swapped, op) in enumerate(self.evaluations):
                par_k = dict(par, m3=self.m_out[op[0]], m4=self.m_out[op[1]])  # canonical outgoing j is slot op[j]
                me[k] = spec.matrix(shat, u, t, par_k) if swapped else spec.matrix(shat, t, u, par_k)
            # flux 1/(2 s-hat), phase space p*/(8 pi sqrt(s-hat)) dcos
            norm = HBARC2_PB * jac * two_body_momentum(np.sqrt(shat), m3, m4) / (16.0 * math.pi * shat * np.sqrt(shat))
        else:
            t = u = np.zeros_like(shat)
            me = np.stack([spec.matrix(shat, t, u, par) for spec, _, _ in self.evaluations])
            # 2 pi delta(s-hat - m^2) / (2 s-hat): dtau dy -> dy / s
            norm = HBARC2_PB * jac * math.pi / (shat * self.s)
        return _PointTerms(x1, x2, shat, c, t, u, mu_r, mu_f, a_s, f1, f2, me, norm)

    def _pass_cuts(self, d: _PointTerms):
        if not self.cuts.active:
            return np.ones(d.shat.shape, bool)
        return self.cuts.mask(self._outgoing(d.shat, d.c, np.zeros_like(d.shat), d.x1, d.x2))

    # --- integrand and events ------------------------------------------------------------------
    def _subprocess_terms(self, d) -> np.ndarray:
        """(subprocesses, points): |M|^2 x f1 x f2 x symmetry factor of each subprocess, from which
        an event's subprocess is drawn."""
        return d.me[self.sub_evaluation] * d.f1[self.sub_parton1] * d.f2[self.sub_parton2] * self.sub_symmetry[:, None]

    def _luminosity_sum(self, d) -> np.ndarray:
        """sum over subprocesses of |M|^2 f1 f2 x symmetry factor, per point."""
        if self.by_pairs:
            lum = self.pair_coeff @ (d.f1[self.pair_a] * d.f2[self.pair_b])
        else:
            k, n = len(self.evaluations), d.f1.shape[0]
            lum = np.einsum("an,kan->kn", d.f1, (self.coeff_rows @ d.f2).reshape(k, n, -1))
        return np.einsum("kn,kn->n", d.me, lum)

    def weights(self, x):
        """Weights (pb) of points x (N, ndim): the sum over subprocesses."""
        out = np.empty(x.shape[0])
        for start in range(0, x.shape[0], _STEP):
            d = self._point_terms(x[start:start + _STEP])
            w = d.norm * self._luminosity_sum(d)
            out[start:start + _STEP] = np.where(self._pass_cuts(d), w, 0.0)
        return out

    def events(self, x, rng: np.random.Generator) -> EventData:
        """Records of points x: a subprocess drawn per point in proportion to its share of the
        weight, its colour flow in proportion to the leading-colour weights, a uniform azimuth."""
        return EventData.concatenate([self._events(x[i:i + _STEP], rng) for i in range(0, x.shape[0], _STEP)])

    def _events(self, x, rng) -> EventData:
        n = x.shape[0]
        d = self._point_terms(x)
        sub = draw_index(self._subprocess_terms(d), rng.random(n))  # in proportion to its share of the weight
        phi = rng.random(n) * (2.0 * math.pi)
        npart = 2 + self.n_out
        p = np.empty((n, npart, 4))
        p[:, 0, :] = self.beam1[None, :] * d.x1[:, None]
        p[:, 1, :] = self.beam2[None, :] * d.x2[:, None]
        p[:, 2:, :] = self._outgoing(d.shat, d.c, phi, d.x1, d.x2)
        pdg = self.sub_pdg[sub]
        colour = np.zeros((n, npart), np.int32)
        anticolour = np.zeros((n, npart), np.int32)
        groups = self.sub_flow_group[sub]
        pick = rng.random(n)
        for g in np.unique(groups):
            flows, tags, swapped = self.flow_groups[g]
            sel = np.flatnonzero(groups == g)
            if not flows:
                continue
            s, t, u = d.shat[sel], d.t[sel], d.u[sel]
            if swapped:
                t, u = u, t
            par = dict(self.params, alpha_s=d.alpha_s[sel], m3=self.m_out[0], m4=self.m_out[-1])
            choice = choose_flows(flows, s, t, u, par, pick[sel])
            colour[sel] = tags[choice, :, 0]
            anticolour[sel] = tags[choice, :, 1]
        if self.shuffle:
            swap = rng.random(n) < 0.5
            for arr in (p, pdg, colour, anticolour):
                arr[swap, 2], arr[swap, 3] = arr[swap, 3].copy(), arr[swap, 2].copy()
        return EventData(p, pdg, colour, anticolour, sub.astype(np.int16), d.mu_r, d.mu_f,
                         d.alpha_s if self.strong else None, d.x1, d.x2)

    # --- records -----------------------------------------------------------------------------
    def particle_layout(self) -> ParticleLayout:
        n = 2 + self.n_out
        return ParticleLayout(
            pdg=self.sub_pdg[0], roles=("incoming", "incoming") + ("outgoing",) * self.n_out,
            parent_first=np.array([-1, -1] + [0] * self.n_out, np.int16),
            parent_last=np.array([-1, -1] + [1] * self.n_out, np.int16),
            colour=np.zeros(n, np.int32), anticolour=np.zeros(n, np.int32),
            mass=np.array(self.masses, np.float64), subprocesses=self.labels, scale=0.0, alpha_em=self.alpha_em)

    def record_sections(self) -> dict:
        cfg = self.cfg
        sources = sorted({" ".join(sub.spec.source.split()) for sub in self.subprocesses})
        names = [p.name for p in self.species]
        collider = {"sqrt_s_GeV": self.sqrt_s, "beam1_GeV": self.beam1.tolist(), "beam2_GeV": self.beam2.tolist(),
                    "cm_beta_z": math.tanh(self.y_beams), "cm_rapidity": self.y_beams,
                    "parton_densities": {"set": self.pdf.name, "member": self.pdf.member,
                                         "folder": str(self.pdf.folder), "description": self.pdf.description},
                    "alpha_s": cfg.partons["alpha_s"], "scales": dict(cfg.scales)}
        if self.n_out == 2:
            collider["pair_mass_range_GeV"] = [math.sqrt(self.shat_min), math.sqrt(self.shat_max)]
        return {
            "process": {"model": cfg.model, "incoming": [p.name for p in cfg.incoming],
                        "outgoing": [p.name for p in cfg.outgoing], "label": cfg.label,
                        "subprocesses": list(self.labels), "evaluations_per_point": len(self.evaluations),
                        "source": sources},
            "collider": collider,
            "parameters": {"model": dict(self.params), "masses_GeV": dict(zip(names, self.masses)),
                           "widths_GeV": particle_widths(cfg, [n for n in names if not species(n).is_group])},
        }

    def couplings(self) -> dict[str, float]:
        out = super().couplings()
        if self.strong:
            out["alpha_s(m_Z)"] = float(self.alpha_s(91.1876)[0])
        return out

    # --- validation ----------------------------------------------------------------------------
    def validation(self, claimed=None) -> ValidationPlan:
        """Drell-Yan lepton pairs: the pair mass and rapidity against dsigma/dM dy =
        (2M/s) sum_i sigma_i(q qbar -> gamma*/Z -> l l)(M^2) f_a(x1) f_b(x2) on a Gauss-Legendre grid,
        with the sample's own parton-density set at mu_F = M."""
        cfg = self.cfg
        scales = cfg.scales
        drell_yan = self.n_out == 2 and all(sub.spec.resonance == ("m_Z", "width_Z") for sub in self.subprocesses)
        only_mass_cuts = all(cfg.cuts.get(k, v) == v for k, v in CUT_DEFAULTS.items()
                             if k not in ("mass_min", "mass_max", "particles")) and "particles" not in cfg.cuts
        if not (drell_yan and only_mass_cuts and scales["factorization"] in ("auto", "sqrt_shat")
                and scales["factor"] == 1 and self.y_beams == 0.0):
            raise CannotValidate("gen validate covers hadron-collider samples of Drell-Yan lepton pairs at symmetric "
                                 "beams with mass cuts only and the factorization scale at the pair mass; other hadron "
                                 "processes are checked by the test suite (tests/test_hadron.py)")
        par = dict(self.params if claimed is None else claimed["model"], m1=0.0, m2=0.0, m3=0.0, m4=0.0)
        s, sqrt_s = self.s, self.sqrt_s
        m_lo, m_hi = math.sqrt(self.shat_min), math.sqrt(self.shat_max)
        c, wc = np.polynomial.legendre.leggauss(8)
        # y in 100 intervals of 4 nodes across |y| <= -ln(M^2/s)/2, so that the reference fills y bins smoothly
        xy, wy = legendre_grid(-1.0, 1.0, 100, 4)

        def reference(level: int):
            m, w_m = legendre_grid(m_lo, m_hi, 200 * level, 4)
            ylim = -0.5 * np.log(m * m / s)
            y = (ylim[:, None] * xy[None, :]).ravel()
            w = (w_m[:, None] * ylim[:, None] * wy[None, :]).ravel()
            mm = np.repeat(m, xy.size)
            x1, x2 = mm / sqrt_s * np.exp(y), mm / sqrt_s * np.exp(-y)
            f1 = self.pdf.xfx_many(self.pids1, x1, mm) / x1
            f2 = self.pdf.xfx_many(self.pids2, x2, mm) / x2
            dens = np.zeros_like(mm)
            for k, sub in enumerate(self.subprocesses):
                quark = next(p for p in sub.partons if species(p).pdg > 0)
                density = REFERENCES[f"electroweak.gamma_z.{quark}"].density
                sigma_hat = np.array([(wc * density(c, sh, par)).sum() for sh in m * m]) / 9.0  # N_c -> 1/N_c
                dens += np.repeat(sigma_hat, xy.size) * f1[self.sub_parton1[k]] * f2[self.sub_parton2[k]]
            return w * 2.0 * mm / s * dens, {"pair_mass": mm, "pair_rapidity": y}

        names = ("pair_mass", "pair_rapidity")
        source = ("dsigma/dM dy = (2M/s) sum over subprocesses of sigma(q qbar -> gamma*/Z -> l l)(M^2) f_a(x1) "
                  "f_b(x2), x1,2 = (M/sqrt s) e^(+-y), densities of the sample's set at mu_F = M; sigma(q qbar -> l l) "
                  "is the e+e- -> q qbar reference (Ellis, Stirling & Webber (1996) sec. 3.1) with N_c -> 1/N_c")
        return ValidationPlan("hadron.drell_yan", source, {k: observables.LABELS[k] for k in names}, reference,
                              lambda p: observables.pair(p, 2))
