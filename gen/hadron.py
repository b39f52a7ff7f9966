"""Hadron collisions: parton densities times parton-level |M|^2, summed over every subprocess.

`HadronCollision` is the integrand of a card with two hadron beams (p, pbar). It plugs into the
same path as the fixed-beam processes (vegas adaptation, calibration, unweighting, the event
writer): `weights(x)` on the unit hypercube and `events(x, rng)` for the records.

Integration variables (2 -> 2, three dimensions): tau = x1 x2 (a Breit-Wigner map in s-hat when the
process has an s-channel resonance inside the allowed mass range, else a logarithmic map), the
rapidity y of the parton system (flat within |y| <= -ln(tau)/2) and cos(theta*) of the first
outgoing particle in the parton centre-of-mass frame (flat, or following the 1/t and 1/u poles of
massless exchange within the range a transverse-momentum cut leaves). A 2 -> 1 process (gluon
fusion to a Higgs boson) is taken in the narrow-width limit, with y its only variable.

    sigma = sum_i int dtau dy dcos  f_a(x1, mu_F) f_b(x2, mu_F) |M_i|^2(mu_R) / (2 s-hat)
            * p* / (8 pi sqrt(s-hat)) * S_i        (S_i: identical-particle factor)

The subprocesses are all parton processes the card's particles or groups allow. At every point
the integrand is their sum; an event's subprocess is then drawn in proportion to the terms of that
sum, so the subprocesses appear in proportion to their cross-sections. |M|^2 is evaluated once per
distinct function and orientation; parton luminosities come from one interpolation of all flavours.
Partons, leptons and photons are massless in hadron collisions (the five-flavour scheme); t, W, Z
and H keep their masses.
"""

from __future__ import annotations

import math
import numpy as np

from . import pdf as _pdf
from .card import RunConfig
from .constants import HBARC2_PB
from .errors import CardError, UserError
from .events import EventData, EventLayout
from .kinematics import AngularMap
from .matrix import MODELS, Subprocess, find_subprocesses
from .matrix.registry import choose_flows, draw_index, flow_tags
from .particles import HADRON_PARTONS, species
from .process import cut_mask, has_cuts, process_label, resolved_mass

__all__ = ["HadronCollision"]

_MASSIVE = {"t", "tbar", "W+", "W-", "Z", "H"}
#: points per internal step: bounds the (subprocesses x points) arrays of event selection
_STEP = 8192


class HadronCollision:
    """A card with hadron beams as one integrand over its subprocesses."""

    def __init__(self, cfg: RunConfig):
        self.cfg = cfg
        src = cfg.source
        model = MODELS[cfg.model]
        if "alpha_s" in cfg.parameters:
            raise CardError(src, "parameters.alpha_s", "alpha_s runs with the scale in hadron collisions; set "
                            "partons.alpha_s (set, one_loop, two_loop) and partons.alpha_s_mz instead")
        self.params = {k: v for k, v in model.resolve(cfg.parameters).items() if k != "alpha_s"}
        self.subs: list[Subprocess] = find_subprocesses(model, tuple(p.name for p in cfg.incoming), tuple(cfg.outgoing))
        assert self.subs, "the card checked that the process has subprocesses"
        self.n_out = len(cfg.outgoing)
        self.ndim = 3 if self.n_out == 2 else 1
        model_masses = model.masses(self.params)
        self.m_out = self._slot_masses(model_masses)
        self.species = tuple(cfg.incoming) + tuple(cfg.outgoing)
        self.masses = (0.0, 0.0) + self.m_out
        self.labels = [sub.label for sub in self.subs]
        # beams: massless hadrons head-on
        col = cfg.collider
        if "sqrt_s" in col:
            e1 = e2 = 0.5 * float(col["sqrt_s"])
            self.beam_key = "collider.sqrt_s"
        else:
            e1, e2 = map(float, col["beam_energies"])
            self.beam_key = "collider.beam_energies"
        self.p_beam1 = np.array([e1, 0.0, 0.0, e1])
        self.p_beam2 = np.array([e2, 0.0, 0.0, -e2])
        self.s = 4.0 * e1 * e2
        self.sqrt_s = math.sqrt(self.s)
        self.beta = (e1 - e2) / (e1 + e2)
        # parton densities and alpha_s
        part = cfg.partons
        try:
            self.pdf = _pdf.load(part["set"], part["member"])
        except UserError as exc:
            raise CardError(src, "partons.set", str(exc)) from None
        if part["alpha_s"] == "set":
            self.alpha_s = self.pdf.alpha_s.tabulated()
        else:
            self.alpha_s = _pdf.AlphaS(alpha_ref=part["alpha_s_mz"], loops=1 if part["alpha_s"] == "one_loop" else 2,
                                       thresholds=(self.pdf.info.get("MCharm", 1.4), self.pdf.info.get("MBottom", 4.75),
                                                   self.pdf.info.get("MTop", 172.5))).tabulated()
        self.alpha_em = float(self.params.get("alpha", 0.0))
        self._setup_channels()
        self._setup_ranges()

    # --- set-up ------------------------------------------------------------------------------
    def _slot_masses(self, model_masses) -> tuple[float, ...]:
        def mass(name):
            return resolved_mass(self.cfg, species(name), model_masses) if name in _MASSIVE else 0.0

        per_slot = []
        for k, slot in enumerate(self.cfg.outgoing):
            ms = {mass(sub.outgoing[k]) for sub in self.subs}
            if len(ms) > 1:
                raise CardError(self.cfg.source, "process.outgoing", f"the slot {slot.name!r} holds particles of different "
                                f"masses ({', '.join(f'{m:g}' for m in sorted(ms))} GeV); name them in separate cards")
            per_slot.append(ms.pop())
        return tuple(per_slot)

    def _setup_channels(self) -> None:
        """Index the subprocesses: parton ids, the distinct |M|^2 evaluations and the luminosity coefficients."""
        b1, b2 = (p.name for p in self.cfg.incoming)
        names = HADRON_PARTONS["p"]
        self.parton_names = names
        sign = {"p": 1, "pbar": -1}
        # x f of parton `name` in beam `b` is x f of PDG id sign * pdg in the proton
        self.pids1 = [sign[b1] * species(n).pdg if species(n).is_quark else 21 for n in names]
        self.pids2 = [sign[b2] * species(n).pdg if species(n).is_quark else 21 for n in names]
        keys: dict[tuple, int] = {}
        self.evals: list[tuple] = []  # (spec, t <-> u flipped, out_perm) per distinct |M|^2 evaluation
        self.sub_key = np.empty(len(self.subs), np.int64)
        self.sub_a = np.empty(len(self.subs), np.int64)
        self.sub_b = np.empty(len(self.subs), np.int64)
        self.sub_sym = np.empty(len(self.subs))
        # t <-> u between the card's order (t against beam 1's parton and slot 1) and the spec's
        self.sub_flipped = [(sub.in_perm[0] != 0) != (self.n_out == 2 and sub.out_perm[0] != 0) for sub in self.subs]
        for i, sub in enumerate(self.subs):
            flipped = self.sub_flipped[i]
            key = (id(sub.spec.matrix), flipped, sub.out_perm)
            if key not in keys:
                keys[key] = len(self.evals)
                self.evals.append((sub.spec, flipped, sub.out_perm))
            self.sub_key[i] = keys[key]
            self.sub_a[i] = names.index(sub.partons[0])
            self.sub_b[i] = names.index(sub.partons[1])
            self.sub_sym[i] = sub.spec.symmetry
        nf = len(names)
        self.lumi = np.zeros((len(self.evals), nf, nf))
        np.add.at(self.lumi, (self.sub_key, self.sub_a, self.sub_b), self.sub_sym)
        # per event: identities and colour flows in the card's particle order
        n = 2 + self.n_out
        self.sub_pdg = np.zeros((len(self.subs), n), np.int32)
        for i, sub in enumerate(self.subs):
            self.sub_pdg[i] = [species(p).pdg for p in sub.partons + sub.outgoing]
        self.strong = max(sub.spec.strong_order for sub in self.subs) > 0
        # the default scale: half_ht when coloured or massive particles come out, else the pair mass
        heavy = any(species(p).colour != 1 or p in _MASSIVE for sub in self.subs for p in sub.outgoing)
        self.auto_scale = "half_ht" if heavy and self.n_out == 2 else "sqrt_shat"
        # colour: group subprocesses sharing flows and permutations; tags in card order per flow
        self.flow_groups: list[tuple[tuple, np.ndarray, bool]] = []  # flows, their tags, t <-> u flipped
        group_of: dict[tuple, int] = {}
        self.sub_flow_group = np.empty(len(self.subs), np.int64)
        for i, sub in enumerate(self.subs):
            flows = sub.spec.colour_flows
            key = (id(flows), sub.in_perm, sub.out_perm)
            if key not in group_of:
                canonical = [sub.in_perm[0], sub.in_perm[1]] + [2 + j for j in sub.out_perm]
                group_of[key] = len(self.flow_groups)
                self.flow_groups.append((flows, flow_tags(flows, canonical, n), self.sub_flipped[i]))
            self.sub_flow_group[i] = group_of[key]
        # slots that may be shuffled: the same name in the card
        names_out = [p.name for p in self.cfg.outgoing]
        self.shuffle = self.n_out == 2 and names_out[0] == names_out[1]

    def _setup_ranges(self) -> None:
        cfg, cuts, src = self.cfg, self.cfg.cuts, self.cfg.source
        self.selected = [i for i, sp in enumerate(cfg.outgoing) if "particles" not in cuts or sp.name in cuts["particles"]]
        self.has_cuts = has_cuts(cuts)
        m3, m4 = (self.m_out + (0.0,))[:2]
        if self.n_out == 1:
            spec = self.subs[0].spec
            self.m_res = float(self.params[spec.resonance[0]])
            if self.m_res >= self.sqrt_s:
                raise CardError(src, self.beam_key, f"sqrt(s) = {self.sqrt_s:g} GeV is below the mass {self.m_res:g} GeV")
            self.tau_fixed = self.m_res**2 / self.s
            return
        shat_min = (m3 + m4) ** 2
        self.pt_min = float(cuts["pt_min"])
        if self.pt_min > 0:
            shat_min = max(shat_min, (math.hypot(m3, self.pt_min) + math.hypot(m4, self.pt_min)) ** 2)
        shat_max = self.s
        all_selected = len(self.selected) == self.n_out
        if all_selected:
            shat_min = max(shat_min, cuts["mass_min"] ** 2)
            shat_max = min(shat_max, cuts["mass_max"] ** 2)
        specs = [sub.spec for sub in self.subs]
        needs = [s for s in specs if s.needs_angular_cut]
        if needs and self.pt_min <= 0.0:
            raise CardError(src, "cuts.pt_min", f"{needs[0].label} has poles where the outgoing particles go along the "
                            "beams (massless exchange); give cuts.pt_min (for example 20 GeV)")
        res = {sub.spec.resonance for sub in self.subs}
        if shat_min <= 0.0 and None not in res:
            shat_min = 1.0  # a resonance alone: generated above 1 GeV of pair mass, where the densities begin
        if shat_min <= 0.0:
            raise CardError(src, "cuts.mass_min", "massless particles need a lower bound on their invariant mass or "
                            "transverse momentum (cuts.mass_min or cuts.pt_min)")
        if shat_min >= shat_max:
            raise CardError(src, "cuts", f"the cuts leave no room: s-hat from {shat_min:g} to {shat_max:g} GeV^2 at "
                            f"sqrt(s) = {self.sqrt_s:g} GeV")
        self.shat_min, self.shat_max = shat_min, shat_max
        self.poles = "both" if any(s.poles != "none" for s in specs) else "none"
        self.pole_power = max((s.pole_power for s in specs if s.poles != "none"), default=2)
        # a Breit-Wigner map when every subprocess has the same s-channel resonance inside the range
        self.bw = None
        if len(res) == 1 and None not in res:
            mname, wname = res.pop()
            m, w = float(self.params[mname]), float(self.params[wname])
            if w > 0 and shat_min < m * m < shat_max:
                self.bw = (m, w, math.atan((shat_min - m * m) / (m * w)), math.atan((shat_max - m * m) / (m * w)))

    # --- kinematics --------------------------------------------------------------------------
    def _point(self, x):
        """Parton kinematics of points x: (x1, x2, s-hat, cos theta*, jacobian in tau, y and cos)."""
        if self.n_out == 1:
            tau = np.full(x.shape[0], self.tau_fixed)
            ylim = -0.5 * math.log(self.tau_fixed)
            y = ylim * (2.0 * x[:, 0] - 1.0)
            jac = np.full(x.shape[0], 2.0 * ylim)
            shat = tau * self.s
            c = np.zeros_like(tau)
        else:
            if self.bw is not None:
                m, w, a1, a2 = self.bw
                th = a1 + (a2 - a1) * x[:, 0]
                shat = m * m + m * w * np.tan(th)
                jac = (a2 - a1) * ((shat - m * m) ** 2 + (m * w) ** 2) / (m * w) / self.s
                tau = shat / self.s
            else:
                t_lo, t_hi = self.shat_min / self.s, self.shat_max / self.s
                span = math.log(t_hi / t_lo)
                tau = t_lo * np.exp(span * x[:, 0])
                jac = tau * span
                shat = tau * self.s
            ylim = -0.5 * np.log(tau)
            y = ylim * (2.0 * x[:, 1] - 1.0)
            jac = jac * 2.0 * ylim
            pstar = self._pstar(shat)
            if self.pt_min > 0:
                cmax = np.sqrt(np.clip(1.0 - (self.pt_min / pstar) ** 2, 0.0, 1.0))
            else:
                cmax = np.ones_like(shat)
            if self.poles == "none":
                c = cmax * (2.0 * x[:, 2] - 1.0)
                jac = jac * 2.0 * cmax
            else:
                c, dc = AngularMap("both", self.pole_power, 0.0, -cmax, cmax)(x[:, 2])
                jac = jac * dc
        sq = np.sqrt(tau)
        ey = np.exp(y)
        return sq * ey, sq / ey, shat, c, jac

    def _pstar(self, shat):
        m3, m4 = self.m_out
        lam = (shat - (m3 + m4) ** 2) * (shat - (m3 - m4) ** 2)
        return np.sqrt(np.clip(lam, 0.0, None)) / (2.0 * np.sqrt(shat))

    def _mandelstam(self, shat, c):
        """t = (p_a - p_3)^2 and u = (p_a - p_4)^2 in card order, a = the parton of beam 1."""
        m3, m4 = self.m_out
        rs = np.sqrt(shat)
        pstar = self._pstar(shat)
        e3 = (shat + m3 * m3 - m4 * m4) / (2.0 * rs)
        t = m3 * m3 - rs * (e3 - pstar * c)
        u = m4 * m4 - rs * ((rs - e3) + pstar * c)
        return t, u

    def _outgoing(self, shat, c, phi, x1, x2):
        """Laboratory momenta (N, n, 4) of the outgoing particles in card order."""
        n = shat.shape[0]
        if self.n_out == 1:
            out = np.zeros((n, 1, 4))
            out[:, 0, 0] = np.sqrt(shat)
        else:
            m3, m4 = self.m_out
            rs = np.sqrt(shat)
            pstar = self._pstar(shat)
            e3 = (shat + m3 * m3 - m4 * m4) / (2.0 * rs)
            sin = np.sqrt(np.clip(1.0 - c * c, 0.0, None))
            out = np.empty((n, 2, 4))
            out[:, 0, 0] = e3
            out[:, 0, 1] = pstar * sin * np.cos(phi)
            out[:, 0, 2] = pstar * sin * np.sin(phi)
            out[:, 0, 3] = pstar * c
            out[:, 1, 0] = rs - e3
            out[:, 1, 1:] = -out[:, 0, 1:]
        # boost from the parton frame to the laboratory: rapidity y_lab = y + y_beams
        e_beam = self.p_beam1[0] * x1 + self.p_beam2[0] * x2
        pz = self.p_beam1[0] * x1 - self.p_beam2[0] * x2
        beta = pz / e_beam
        gamma = 1.0 / np.sqrt((1.0 - beta) * (1.0 + beta))
        e, z = out[..., 0].copy(), out[..., 3].copy()
        out[..., 0] = gamma[:, None] * (e + beta[:, None] * z)
        out[..., 3] = gamma[:, None] * (z + beta[:, None] * e)
        return out

    def _scale(self, choice, shat, c):
        """A scale (GeV) per point: fixed, or dynamic (floored at 1 GeV, where pt -> 0 would leave none)."""
        f = self.cfg.scales["factor"]
        if not isinstance(choice, str):
            return np.full(shat.shape, float(choice) * f)
        if choice == "auto":
            choice = self.auto_scale
        if choice == "sqrt_shat":
            mu = np.sqrt(shat)
        else:
            pt = self._pstar(shat) * np.sqrt(np.clip(1.0 - c * c, 0.0, None))
            mu = pt if choice == "pt" else 0.5 * sum(np.sqrt(m * m + pt * pt) for m in self.m_out)  # half_ht
        return np.maximum(mu * f, 1.0)

    def _terms(self, x):
        """Everything a point needs: kinematics, scales, alpha_s, parton densities, |M|^2 per evaluation."""
        x1, x2, shat, c, jac = self._point(x)
        mu_r = self._scale(self.cfg.scales["renormalization"], shat, c)
        mu_f = self._scale(self.cfg.scales["factorization"], shat, c)
        a_s = self.alpha_s(mu_r)
        f1 = self.pdf.xfx_many(self.pids1, x1, mu_f) / x1
        f2 = self.pdf.xfx_many(self.pids2, x2, mu_f) / x2
        par = dict(self.params, alpha_s=a_s, m1=0.0, m2=0.0)
        if self.n_out == 2:
            t, u = self._mandelstam(shat, c)
            me = np.empty((len(self.evals), shat.size))
            for k, (spec, flipped, op) in enumerate(self.evals):
                par_k = dict(par, m3=self.m_out[op[0]], m4=self.m_out[op[1]])  # canonical outgoing j is slot op[j]
                me[k] = spec.matrix(shat, u, t, par_k) if flipped else spec.matrix(shat, t, u, par_k)
            # flux 1/(2 s-hat), phase space p*/(8 pi sqrt(s-hat)) dcos
            norm = HBARC2_PB * jac * self._pstar(shat) / (16.0 * math.pi * shat * np.sqrt(shat))
        else:
            t = u = np.zeros_like(shat)
            me = np.stack([spec.matrix(shat, t, u, par) for spec, _, _ in self.evals])
            # 2 pi delta(s-hat - m^2) / (2 s-hat): dtau dy -> dy / s
            norm = HBARC2_PB * jac * math.pi / (shat * self.s)
        return dict(x1=x1, x2=x2, shat=shat, c=c, t=t, u=u, mu_r=mu_r, mu_f=mu_f, alpha_s=a_s, f1=f1, f2=f2,
                    me=me, norm=norm)

    def _pass_cuts(self, shat, c, x1, x2):
        if not self.has_cuts:
            return np.ones(shat.shape, bool)
        lab = self._outgoing(shat, c, np.zeros_like(shat), x1, x2)
        return cut_mask(self.cfg.cuts, lab, self.selected)

    # --- integrand and events ------------------------------------------------------------------
    def weights(self, x):
        """Weights (pb) of points x (N, ndim): the sum over subprocesses."""
        out = np.empty(x.shape[0])
        for start in range(0, x.shape[0], _STEP):
            xs = x[start:start + _STEP]
            d = self._terms(xs)
            lum = np.einsum("an,kab,bn->kn", d["f1"], self.lumi, d["f2"])
            w = d["norm"] * np.einsum("kn,kn->n", d["me"], lum)
            out[start:start + _STEP] = np.where(self._pass_cuts(d["shat"], d["c"], d["x1"], d["x2"]), w, 0.0)
        return out

    def events(self, x, rng: np.random.Generator) -> EventData:
        """Records of points x: a subprocess drawn per point in proportion to its share of the
        weight, its colour flow in proportion to the leading-colour weights, a uniform azimuth."""
        parts = [self._events(x[i:i + _STEP], rng) for i in range(0, x.shape[0], _STEP)]
        if len(parts) == 1:
            return parts[0]
        return EventData(**{f: np.concatenate([getattr(p, f) for p in parts]) if getattr(parts[0], f) is not None
                            else None for f in EventData.__dataclass_fields__})

    def _events(self, x, rng) -> EventData:
        n = x.shape[0]
        d = self._terms(x)
        # share of each subprocess at each point
        w_sub = d["me"][self.sub_key] * d["f1"][self.sub_a] * d["f2"][self.sub_b] * self.sub_sym[:, None]
        sub = draw_index(w_sub, rng.random(n))
        phi = rng.random(n) * (2.0 * math.pi)
        npart = 2 + self.n_out
        p = np.empty((n, npart, 4))
        p[:, 0, :] = self.p_beam1[None, :] * d["x1"][:, None]
        p[:, 1, :] = self.p_beam2[None, :] * d["x2"][:, None]
        p[:, 2:, :] = self._outgoing(d["shat"], d["c"], phi, d["x1"], d["x2"])
        pdg = self.sub_pdg[sub]
        colour = np.zeros((n, npart), np.int32)
        anticolour = np.zeros((n, npart), np.int32)
        groups = self.sub_flow_group[sub]
        pick = rng.random(n)
        for g in np.unique(groups):
            flows, tags, flipped = self.flow_groups[g]
            sel = np.flatnonzero(groups == g)
            if not flows:
                continue
            s, t, u = d["shat"][sel], d["t"][sel], d["u"][sel]
            if flipped:
                t, u = u, t
            par = dict(self.params, alpha_s=d["alpha_s"][sel], m3=self.m_out[0], m4=self.m_out[-1])
            choice = choose_flows(flows, s, t, u, par, pick[sel])
            colour[sel] = tags[choice, :, 0]
            anticolour[sel] = tags[choice, :, 1]
        if self.shuffle:
            swap = rng.random(n) < 0.5
            for arr in (p, pdg, colour, anticolour):
                arr[swap, 2], arr[swap, 3] = arr[swap, 3].copy(), arr[swap, 2].copy()
        return EventData(p, pdg, colour, anticolour, sub.astype(np.int16), d["mu_r"], d["mu_f"],
                         d["alpha_s"] if self.strong else None, d["x1"], d["x2"])

    def momenta(self, x, rng):
        return self.events(x, rng).momenta

    # --- records -----------------------------------------------------------------------------
    def event_layout(self) -> EventLayout:
        n = 2 + self.n_out
        return EventLayout(
            pdg=self.sub_pdg[0], roles=["incoming", "incoming"] + ["outgoing"] * self.n_out,
            parent_first=np.array([-1, -1] + [0] * self.n_out, np.int16),
            parent_last=np.array([-1, -1] + [1] * self.n_out, np.int16),
            colour=np.zeros(n, np.int32), anticolour=np.zeros(n, np.int32),
            mass=np.array(self.masses, np.float64), subprocesses=self.labels, scale=0.0, alpha_em=self.alpha_em)

    def record_sections(self) -> dict:
        cfg = self.cfg
        sources = sorted({" ".join(sub.spec.source.split()) for sub in self.subs})
        return {
            "process": {"model": cfg.model, "incoming": [p.name for p in cfg.incoming],
                        "outgoing": [p.name for p in cfg.outgoing], "label": process_label(cfg),
                        "subprocesses": self.labels, "source": sources},
            "collider": {"sqrt_s_GeV": self.sqrt_s, "beam1_GeV": self.p_beam1.tolist(),
                         "beam2_GeV": self.p_beam2.tolist(), "cm_beta_z": self.beta,
                         "parton_densities": {"set": self.pdf.name, "member": self.pdf.member,
                                              "folder": str(self.pdf.folder), "description": self.pdf.description},
                         "alpha_s": cfg.partons["alpha_s"], "scales": dict(cfg.scales)},
            "parameters": {"model": dict(self.params),
                           "masses_GeV": {p.name: m for p, m in zip(self.species, self.masses)}},
        }
