"""Hadron collisions of the automatic amplitudes: parton densities times tree |M|^2 of every parton
process the model file has for the card's particles or groups (2 -> 2 and 2 -> 3).

Integration variables: s-hat (a logarithmic map from the cuts' lower bound to s), the rapidity y
of the parton system (flat within |y| <= -ln(tau)/2), then the parton-frame phase space of
`gen.processes.tree` (decay trees along the amplitude's propagators, several combined as one
multi-channel) at the point's own sqrt(s-hat):

    sigma = sum_i int dtau dy dPhi_n  f_a(x1, mu_F) f_b(x2, mu_F) |M_i|^2(alpha_s(mu_R)) / (2 s-hat) * S_i

One amplitude serves a parton pair in both orientations (the beams' momenta swapped); the strong
coupling runs per event through the couplings of the vertices that carry it
(`TreeAmplitude.squared`). Partons, leptons and the b quark are massless (the five-flavour
scheme); t, W, Z and H keep their masses. An event's subprocess is drawn in proportion to its
share of the weight, its colour flow from its amplitude's leading-colour flows, and particles in
slots of the same card name are shuffled (their phase space is symmetric).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..card import MASSIVE_IN_HADRON_COLLISIONS, TREE_ALPHA_S_REFERENCE
from ..physics import tree
from ..physics.channels import MultiChannel
from ..physics.constants import HBARC2_PB
from ..physics.kinematics import BreitWignerMap, PowerMap, boost_z
from ..physics.matrix.registry import draw_index
from ..physics.particles import antiparticle, species
from ..physics.tree.amplitudes import flow_chooser
from .hadron import HadronCollision, coloured_slot, jet_and_boson_scales
from .interface import CannotValidate, Channel, EventData
from .tree import amplitude_inputs, channel_report, propagator_structures, topologies

__all__ = ["TreeHadronProcess"]

#: points per internal step
_STEP = 4096


@dataclass
class _Terms:
    x1: np.ndarray
    x2: np.ndarray
    shat: np.ndarray
    cm: np.ndarray  # (N, n_out, 4) outgoing momenta in the parton frame
    lab: np.ndarray  # (N, n_out, 4) in the laboratory
    mu_r: np.ndarray
    mu_f: np.ndarray
    alpha_s: np.ndarray
    f1: np.ndarray
    f2: np.ndarray
    me: np.ndarray  # (evaluations, N), zero outside the cuts
    norm: np.ndarray


class _Renamer:
    """Renames the quark flavours of each class of interchangeable flavours (`tree.interchangeable_quarks`)
    in order of first appearance to the class's members in order, antiquarks with their quarks."""

    def __init__(self, classes):
        self.classes = classes
        self.of = {q: k for k, cls in enumerate(classes) for q in cls}

    def __call__(self, names: tuple[str, ...]) -> tuple[str, ...]:
        if not self.classes:
            return names
        given: dict[str, str] = {}
        used = [0] * len(self.classes)
        out = []
        for n in names:
            sp = species(n)
            q = n if sp.pdg > 0 else antiparticle(n)
            k = self.of.get(q)
            if k is None:
                out.append(n)
                continue
            if q not in given:
                given[q] = self.classes[k][used[k]]
                used[k] += 1
            out.append(given[q] if q == n else antiparticle(given[q]))
        return tuple(out)


def _beam_order(name: str) -> tuple:
    """The order of two incoming partons in the amplitude built for them, the same for every
    flavour (gluon, then quark, then antiquark) so that u g and c g build alike and share one
    evaluation."""
    sp = species(name)
    return -abs(sp.colour), -1 if sp.colour > 0 else 1, name


class TreeHadronProcess(HadronCollision):
    """A card with hadron beams and a model of automatic amplitudes (see the module docstring)."""

    def _index_subprocesses(self) -> None:
        cfg = self.cfg
        params = dict(self.params, alpha_s=TREE_ALPHA_S_REFERENCE)
        inputs = amplitude_inputs(cfg, dict(tree.HADRON_MASSLESS))
        self.amplitudes: list = []
        #: (amplitude index, beams swapped) of each distinct |M|^2 evaluation
        self.evaluations: list[tuple[int, bool]] = []
        self.sub_evaluation = np.empty(len(self.subprocesses), np.int64)
        amp_of: dict[tuple, int] = {}
        ev_of: dict[tuple, int] = {}
        prints: list[tuple[tuple, np.ndarray]] = []
        rename = _Renamer(tree.interchangeable_quarks(cfg.model, params, inputs["masses"], inputs["widths"]))
        for i, sub in enumerate(self.subprocesses):
            a, b = sub.partons
            canon = tuple(sorted((a, b), key=_beam_order))
            # flavours the model cannot tell apart renamed in order of appearance: c s -> c s g
            # is built as u d -> u d g, and the two share one amplitude without building both
            key = rename(canon + tuple(sub.outgoing))
            key = (key[:2], key[2:])
            if key not in amp_of:
                amp = tree.build(cfg.model, list(key[0]), list(key[1]), params=params, **inputs)
                amp_of[key] = self._same_as(amp, prints)
                if amp_of[key] == len(self.amplitudes):
                    self.amplitudes.append(amp)
            ek = (amp_of[key], (a, b) != canon)
            if ek not in ev_of:
                ev_of[ek] = len(self.evaluations)
                self.evaluations.append(ek)
            self.sub_evaluation[i] = ev_of[ek]
        self._luminosity_tables()
        self.strong = any(amp.strong for amp in self.amplitudes)
        # the default scale as for the hand-coded processes: half_ht when coloured or massive
        # particles come out, else the mass of the outgoing system
        heavy = any(species(p).colour != 1 or p in MASSIVE_IN_HADRON_COLLISIONS
                    for sub in self.subprocesses for p in sub.outgoing)
        self.auto_scale = "half_ht" if heavy else "sqrt_shat"
        self.flows = [flow_chooser(amp) for amp in self.amplitudes]
        names = [p.name for p in cfg.outgoing]
        self.same_slots = [[k for k, n in enumerate(names) if n == name] for name in dict.fromkeys(names)]
        self.same_slots = [g for g in self.same_slots if len(g) > 1]

    def _same_as(self, amp, prints: list) -> int:
        """The index of an amplitude already built whose |M|^2 equals amp's (to 1e-12, at probe
        points of the same masses, with the same spins and colours: u ubar and c cbar -> t tbar,
        say), so that it is evaluated once; else the index amp gets."""
        sig = tuple((leg.mass, leg.kind, leg.colour) for leg in amp.legs)
        value = amp.squared(amp.probe_momenta(7, 4), np.random.default_rng(0))
        for k, (s, v) in enumerate(prints):
            if s == sig and np.allclose(v, value, rtol=1e-12, atol=0.0):
                return k
        prints.append((sig, value))
        return len(prints) - 1

    def _set_up_phase_space(self) -> None:
        cfg = self.cfg
        self.shat_min, self.shat_max = cfg.resolved.shat_range
        self.shat_map = PowerMap(1.0)
        structures, seen = [], set()
        masses, widths = {}, {}
        for amp in self.amplitudes:
            rec = amp.recursion
            masses.update(rec.masses)
            widths.update(rec.widths)
            for st in propagator_structures(rec, 2):
                if st not in seen:
                    seen.add(st)
                    structures.append(st)
        # a Breit-Wigner map in s-hat when every amplitude has the same resonance made by all the
        # outgoing particles (Drell-Yan through a Z, say) and its mass is inside the range
        lines = [self._s_channel(amp.recursion) for amp in self.amplitudes]
        common = set.intersection(*lines) if lines else set()
        for label in sorted(common):
            m, w = masses.get(label, 0.0), widths.get(label, 0.0)
            if w > 0 and self.shat_min < m * m < self.shat_max:
                self.shat_map = BreitWignerMap(m, w)
                break
        self.phase = MultiChannel(topologies(structures, self.n_out, masses, math.sqrt(self.shat_max), widths,
                                             self.cuts.pair_s_min, list(self.m_out)))
        for top in self.phase.topologies:  # the parts of the root splitting share their p_T
            top.root_pt_min = max([self.cuts.lower("pt_min", c) for c in top.root.children if isinstance(c, int)],
                                  default=0.0)
        names = ", ".join(t.name for t in self.phase.topologies)
        self.channels = (Channel(f"s-hat, y; {self.phase.k} decay tree{'s' if self.phase.k > 1 else ''}: {names}",
                                 2 + self.phase.ndim),)
        # two outgoing particles with a p_T cut and no resonance in s-hat: p_T^2, y3, y4 and the
        # azimuth, the rapidity ranges those of the cuts where they bind (as HadronCollision does)
        self.pt_min = max(self.cuts.lower("pt_min", k) for k in range(self.n_out))
        self.pt_rapidities = self.n_out == 2 and self.pt_min > 0 and not isinstance(self.shat_map, BreitWignerMap)
        if self.pt_rapidities:
            self.y_ranges = self.rapidity_ranges()
            self.channels = (Channel("p_T^2, y3, y4, phi", 4),)

    @staticmethod
    def _s_channel(rec) -> set[str]:
        """Labels of the lines that join the two incoming partons to all the outgoing particles."""
        return {label for mask, label in rec.joins if mask == 0b11 or mask == ((1 << rec.n) - 1) ^ 0b11}

    # --- kinematics --------------------------------------------------------------------------
    def _dynamic_scale(self, choice, shat, cm):
        """pt (of the card's first outgoing particle), half_ht, boson_mt or jets_pt_mean (GeV) per
        point, from the parton-frame momenta cm (N, n_out, 4)."""
        if choice in ("boson_mt", "jets_pt_mean"):
            coloured = np.array([coloured_slot(self.subprocesses, k) for k in range(self.n_out)])
            return jet_and_boson_scales(choice, cm, coloured)
        pt2 = cm[..., 1] ** 2 + cm[..., 2] ** 2
        if choice == "pt":
            return np.sqrt(pt2[:, 0])
        return 0.5 * np.sqrt(pt2 + np.asarray(self.m_out) ** 2).sum(axis=1)

    def _momenta(self, x):
        """(x1, x2, s-hat, parton-frame and laboratory outgoing momenta, weight of the variables)."""
        if self.pt_rapidities:
            return self._pt_rapidity_momenta(x)
        shat, jac_s = self.shat_map(x[:, 0], self.shat_min, self.shat_max)
        tau = shat / self.s
        ylim = -0.5 * np.log(tau)
        y = ylim * (2.0 * x[:, 1] - 1.0)
        cm, w_ps, _ = self.phase.generate(x[:, 2:], np.sqrt(shat))
        sq, ey = np.sqrt(tau), np.exp(y)
        lab = boost_z(cm, y + self.y_beams)
        # dtau dy = ds-hat dy / s; the flux 1 / (2 s-hat)
        norm = HBARC2_PB * jac_s / self.s * 2.0 * ylim * w_ps / (2.0 * shat)
        return sq * ey, sq / ey, shat, cm, lab, norm

    def _pt_rapidity_momenta(self, x):
        """The same from p_T^2 (density ~ p_T^-4), y3, y4 (flat) and the azimuth: with transverse
        masses m_T,i, x1,2 = (m_T3 e^(+-y3) + m_T4 e^(+-y4)) / sqrt(s) and dx1 dx2 dt = x1 x2 dp_T^2
        dy3 dy4, so sigma = int f1 f2 x1 x2 |M|^2 / (16 pi s-hat^2) dp_T^2 dy3 dy4 (Ellis, Stirling &
        Webber (1996), ch. 7, from memory; the Jacobian holds for massive particles too, checked
        numerically)."""
        q, jac_q = PowerMap(2.0)(x[:, 0], self.pt_min ** 2, self.s / 4.0)
        (a3, b3), (a4, b4) = self.y_ranges
        y3, y4 = a3 + (b3 - a3) * x[:, 1], a4 + (b4 - a4) * x[:, 2]
        phi = 2.0 * math.pi * x[:, 3]
        pt_ = np.sqrt(q)
        mt3, mt4 = (np.sqrt(m * m + q) for m in self.m_out)
        x1 = (mt3 * np.exp(y3) + mt4 * np.exp(y4)) / self.sqrt_s
        x2 = (mt3 * np.exp(-y3) + mt4 * np.exp(-y4)) / self.sqrt_s
        shat = x1 * x2 * self.s
        inside = (x1 < 1.0) & (x2 < 1.0) & (shat >= self.shat_min) & (shat <= self.shat_max)
        x1, x2 = np.where(inside, x1, 0.5), np.where(inside, x2, 0.5)
        hf = np.empty((x.shape[0], 2, 4))  # the hadrons' frame
        for k, (mt, y, sign) in enumerate(((mt3, y3, 1.0), (mt4, y4, -1.0))):
            hf[:, k, 0], hf[:, k, 3] = mt * np.cosh(y), mt * np.sinh(y)
            hf[:, k, 1], hf[:, k, 2] = sign * pt_ * np.cos(phi), sign * pt_ * np.sin(phi)
        cm = boost_z(hf, -0.5 * np.log(x1 / x2))
        lab = boost_z(hf, np.full(x.shape[0], self.y_beams))
        shat = x1 * x2 * self.s
        norm = np.where(inside, HBARC2_PB * x1 * x2 * jac_q * (b3 - a3) * (b4 - a4) / (16.0 * math.pi * shat * shat),
                        0.0)
        return x1, x2, shat, cm, lab, norm

    def _parton_momenta(self, shat, cm, swapped: bool):
        n = shat.shape[0]
        half = 0.5 * np.sqrt(shat)
        full = np.zeros((n, 2 + self.n_out, 4))
        a, b = (1, 0) if swapped else (0, 1)
        full[:, a, 0] = full[:, a, 3] = half
        full[:, b, 0] = half
        full[:, b, 3] = -half
        full[:, 2:] = cm
        return full

    def _terms(self, x) -> _Terms:
        x1, x2, shat, cm, lab, norm = self._momenta(x)
        live = norm > 0
        if self.cuts.active:
            live &= self.cuts.mask(lab)
        mu_r = self._scale(self.cfg.scales["renormalization"], shat, cm)
        mu_f = self._scale(self.cfg.scales["factorization"], shat, cm)
        a_s = self.alpha_s(mu_r)
        f1 = self.pdf.xfx_many(self.pids1, x1, mu_f) / x1
        f2 = self.pdf.xfx_many(self.pids2, x2, mu_f) / x2
        me = np.zeros((len(self.evaluations), x.shape[0]))
        if live.any():
            # sampled helicities or colours draw from a stream fixed by the points (see TreeProcess.weights)
            rng = np.random.default_rng(np.frombuffer(np.ascontiguousarray(x[:1]).tobytes(), np.uint32))
            for k, (ai, swapped) in enumerate(self.evaluations):
                full = self._parton_momenta(shat[live], cm[live], swapped)
                me[k, live] = self.amplitudes[ai].squared(full, rng, a_s[live])
        return _Terms(x1, x2, shat, cm, lab, mu_r, mu_f, a_s, f1, f2, me, np.where(live, norm, 0.0))

    def channel_report(self, nodes) -> list[dict]:
        if self.pt_rapidities:
            return []
        return channel_report(self, self.phase, nodes, 2,
                              lambda x: np.sqrt(self.shat_map(x[:, 0], self.shat_min, self.shat_max)[0]))

    # --- integrand and events ------------------------------------------------------------------
    def weights(self, x):
        out = np.empty(x.shape[0])
        for start in range(0, x.shape[0], _STEP):
            d = self._terms(x[start:start + _STEP])
            out[start:start + _STEP] = d.norm * self._luminosity_sum(d)
        return out

    def events(self, x, rng: np.random.Generator) -> EventData:
        return EventData.concatenate([self._events(x[i:i + _STEP], rng) for i in range(0, x.shape[0], _STEP)])

    def _events(self, x, rng) -> EventData:
        n = x.shape[0]
        d = self._terms(x)
        sub = draw_index(self._subprocess_terms(d), rng.random(n))
        npart = 2 + self.n_out
        p = np.empty((n, npart, 4))
        p[:, 0, :] = self.beam1[None, :] * d.x1[:, None]
        p[:, 1, :] = self.beam2[None, :] * d.x2[:, None]
        p[:, 2:, :] = d.lab
        pdg = self.sub_pdg[sub]
        colour = np.zeros((n, npart), np.int32)
        anticolour = np.zeros((n, npart), np.int32)
        sampled = any(amp.helicity_mode == "sample" for amp in self.amplitudes)
        hel = np.full((n, npart), np.nan, np.float32) if sampled else None
        ev = self.sub_evaluation[sub]
        order = [1, 0] + list(range(2, npart))
        for k in np.unique(ev):
            ai, swapped = self.evaluations[k]
            sel = np.flatnonzero(ev == k)
            full = self._parton_momenta(d.shat[sel], d.cm[sel], swapped)  # in the amplitude's leg order
            if sampled:
                h = self.amplitudes[ai].draw_helicities(full, rng)
                hel[sel] = h[:, order] if swapped else h
            chooser = self.flows[ai]
            if len(chooser.flows) < 2:
                tags = np.broadcast_to(chooser.tags[0], (sel.size,) + chooser.tags[0].shape)
            else:
                tags = chooser.tags[chooser.choose(full, rng)]
            if swapped:  # the amplitude's first incoming parton is beam 2's
                tags = tags[:, order]
            colour[sel], anticolour[sel] = tags[..., 0], tags[..., 1]
        for slots in self.same_slots:
            cols = 2 + np.array(slots)
            perm = cols[np.argsort(rng.random((n, len(slots))), axis=1)]
            rows = np.arange(n)[:, None]
            for arr in (p, pdg, colour, anticolour) + (() if hel is None else (hel,)):
                arr[:, cols] = arr[rows, perm]
        return EventData(p, pdg, colour, anticolour, sub.astype(np.int16), d.mu_r, d.mu_f,
                         d.alpha_s if self.strong else None, d.x1, d.x2, helicity=hel)

    def validation(self, claimed=None):
        raise CannotValidate("samples of the automatic amplitudes have no analytic reference in gen validate; the "
                             "amplitudes are checked against the hand-coded library and published values by the "
                             "tests (tests/test_tree.py)")
