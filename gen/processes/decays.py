"""Decay chains in the narrow-width approximation.

A card's `[decays]` section names, for a particle the process makes, the two particles it decays
into (and, optionally, the branching ratio and the mass window); decay products may decay again
(t -> b W+, W+ -> e+ nu_e). The card validator resolves the chain into `DecayStep`s (which
particle, into what, mass, width, branching ratio); the cross-section is that of the production
times the product of the branching ratios.

Each event's resonance mass is drawn from a Breit-Wigner (fixed width) truncated to the window
M +- window x Gamma (and to what the event's energy allows). The production is generated at the
nominal masses; its final state is then rebuilt with the drawn masses at the same angles in its
own rest frame, so momentum is conserved at every step, and the mass does not reweight the event.
Decays are isotropic in the resonance's rest frame: spin correlations between production and
decay are not kept (they are exact where the full |M|^2 of the final state is in the library,
as for e+e- -> gamma*/Z -> l+ l-, Drell-Yan or W production). The decayed particle is written as
`intermediate`, its products as `outgoing` with parent links to it.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from ..card import DecayStep
from ..physics.kinematics import BreitWignerMap, mass, to_rest_frame, two_body_decay
from ..physics.particles import species
from .interface import CannotValidate, EventData, ParticleLayout, Process, ValidationPlan

__all__ = ["DecayChain", "WithDecays"]


class DecayChain:
    """The decays of one run: the resolved steps, and what they do to an event."""

    def __init__(self, steps: tuple[DecayStep, ...], names: tuple[str, ...], masses: tuple[float, ...], n_in: int):
        self.steps = steps
        self.names = names
        self.masses = np.array(masses, float)
        self.n_in = n_in
        self.branching_ratio = math.prod(st.branching_ratio for st in steps)

    def layout(self, base: ParticleLayout) -> ParticleLayout:
        n = len(self.names)
        roles = list(base.roles) + ["outgoing"] * (n - base.n)
        pf = np.concatenate([base.parent_first, np.zeros(n - base.n, np.int16)])
        pl = np.concatenate([base.parent_last, np.zeros(n - base.n, np.int16)])
        for st in self.steps:
            roles[st.parent] = "intermediate"
            for k in st.children:
                pf[k] = pl[k] = st.parent
        pdg = np.concatenate([base.pdg, np.array([species(nm).pdg for nm in self.names[base.n:]], np.int32)])
        zeros = np.zeros(n - base.n, np.int32)
        return ParticleLayout(pdg=pdg, roles=tuple(roles), parent_first=pf.astype(np.int16),
                              parent_last=pl.astype(np.int16), colour=np.concatenate([base.colour, zeros]),
                              anticolour=np.concatenate([base.anticolour, zeros]), mass=self.masses.copy(),
                              subprocesses=base.subprocesses, scale=base.scale, alpha_em=base.alpha_em,
                              alpha_s=base.alpha_s)

    @staticmethod
    def _draw_mass(st: DecayStep, n: int, lo: np.ndarray, rng) -> np.ndarray:
        """Masses from a Breit-Wigner in s truncated to the window and to at least lo per event."""
        m, w = st.mass, st.width
        if w <= 0.0:
            return np.full(n, m)
        lo = np.maximum(lo, m - st.window * w)
        hi = m + st.window * w
        s, _ = BreitWignerMap(m, w)(rng.random(n), np.maximum(lo, 0.0) ** 2, hi * hi)
        return np.sqrt(s)

    def apply(self, data: EventData, base: ParticleLayout, rng: np.random.Generator) -> EventData:
        """Events with every decay done: intermediate particles and their products appended."""
        p0 = data.momenta
        nev, n0 = p0.shape[0], p0.shape[1]
        n = len(self.names)
        masses = np.tile(self.masses, (nev, 1))
        # masses: products first (innermost decays last in the list), so parents see their children
        for st in reversed(self.steps):
            kids_min = masses[:, st.children[0]] + masses[:, st.children[1]]
            masses[:, st.parent] = self._draw_mass(st, nev, kids_min * (1 + 1e-9), rng)
        p = np.zeros((nev, n, 4))
        p[:, :n0] = p0
        self._remass_production(p, masses, n0)
        for st in self.steps:
            k1, k2 = st.children
            cos_t = 2.0 * rng.random(nev) - 1.0
            phi = rng.random(nev) * (2.0 * math.pi)
            p[:, k1], p[:, k2], _ = two_body_decay(p[:, st.parent], masses[:, st.parent], masses[:, k1],
                                                    masses[:, k2], cos_t, phi)
        pdg = None
        if data.pdg is not None:
            pdg = np.empty((nev, n), np.int32)
            pdg[:, :n0] = data.pdg
            pdg[:, n0:] = np.array([species(nm).pdg for nm in self.names[n0:]], np.int32)
        colour = np.zeros((nev, n), np.int32)
        anti = np.zeros((nev, n), np.int32)
        colour[:, :n0] = base.colour if data.colour is None else data.colour
        anti[:, :n0] = base.anticolour if data.anticolour is None else data.anticolour
        for st in self.steps:
            self._colour(st, colour, anti)
        return EventData(p, pdg, colour, anti, data.subprocess, data.scale, data.factorization_scale,
                         data.alpha_s, data.x1, data.x2, masses)

    def _remass_production(self, p: np.ndarray, masses: np.ndarray, n0: int) -> None:
        """Rebuild a 2 -> 2 production final state with the drawn masses at the same angles in its
        rest frame; where the masses do not fit the event's energy, keep the nominal ones. Other
        productions (2 -> 1, decays at rest, three outgoing) keep their resonances at the mass the
        production gave them."""
        decayed = [st.parent for st in self.steps if st.parent < n0]
        if not decayed:
            return
        if self.n_in != 2 or n0 != 4:
            for i in decayed:
                masses[:, i] = mass(p[:, i])
            return
        total = p[:, 2] + p[:, 3]
        m_tot = mass(total)
        rest = to_rest_frame(p[:, 2], total)
        r = np.linalg.norm(rest[:, 1:], axis=1)
        cos_t = np.clip(rest[:, 3] / np.where(r > 0, r, 1.0), -1.0, 1.0)
        phi = np.arctan2(rest[:, 2], rest[:, 1])
        fits = masses[:, 2] + masses[:, 3] < m_tot
        masses[~fits, 2:4] = self.masses[2:4]
        p[:, 2], p[:, 3], _ = two_body_decay(total, m_tot, masses[:, 2], masses[:, 3], cos_t, phi)

    @staticmethod
    def _colour(st: DecayStep, colour: np.ndarray, anti: np.ndarray) -> None:
        """Colour lines of a decay (the card validator admits only these patterns)."""
        k1, k2 = st.children
        c, a = colour[:, st.parent], anti[:, st.parent]
        products = [species(st.products[0]), species(st.products[1])]
        if species(st.particle).is_quark:  # the quark child carries the parent's colour line
            for k, sp in zip((k1, k2), products):
                if sp.is_quark:
                    colour[:, k], anti[:, k] = c, a
            return
        new = np.maximum(colour.max(axis=1), anti.max(axis=1)) + 1
        if all(sp.is_quark for sp in products):  # a colour singlet into q qbar: a new line
            for k, sp in zip((k1, k2), products):
                if sp.colour == 3:
                    colour[:, k] = new
                else:
                    anti[:, k] = new
        elif all(sp.colour == 8 for sp in products):  # a colour singlet into g g: two lines joining them
            colour[:, k1], anti[:, k2] = new, new
            colour[:, k2], anti[:, k1] = new + 1, new + 1

    def describe(self) -> list[dict]:
        return [{"particle": st.particle, "index": st.parent, "into": list(st.products),
                 "branching_ratio": st.branching_ratio, "branching_ratio_source": st.branching_ratio_source,
                 "mass_GeV": st.mass, "width_GeV": st.width, "window_widths": st.window} for st in self.steps]


class WithDecays(Process):
    """A process followed by its card's decay chain: sigma x BR, events with the decays done."""

    def __init__(self, production: Process):
        self.production = production
        self.cfg = production.cfg
        self.species = production.species
        self.masses = production.masses
        self.params = production.params
        self.measure = production.measure
        self.channels = production.channels
        res = self.cfg.resolved
        self.chain = DecayChain(res.decays, res.names, res.masses, len(self.cfg.incoming))
        self._base = production.particle_layout()
        self._layout = self.chain.layout(self._base)

    def weights(self, x):
        return self.production.weights(x) * self.chain.branching_ratio

    def events(self, x, rng: np.random.Generator) -> EventData:
        return self.chain.apply(self.production.events(x, rng), self._base, rng)

    def particle_layout(self) -> ParticleLayout:
        return self._layout

    def record_sections(self) -> dict:
        rec = self.production.record_sections()
        rec["decays"] = {"chain": self.chain.describe(), "total_branching_ratio": self.chain.branching_ratio,
                         "treatment": "narrow width: sigma(production) x branching ratios; Breit-Wigner masses in the "
                                      "window; isotropic decays (no spin correlations)"}
        return rec

    def couplings(self) -> dict[str, float]:
        return self.production.couplings()

    def validation(self, claimed=None) -> ValidationPlan:
        """The production's plan times the branching ratios, on the production angle only: the
        Breit-Wigner masses of the decayed particles change their energies, transverse momenta and
        rapidities, not their direction in the centre-of-mass frame."""
        try:
            plan = self.production.validation(claimed)
        except CannotValidate as exc:
            raise CannotValidate(f"{exc}; the decay chain itself is checked by the test suite "
                                 "(tests/test_decays.py)") from None
        angle = {k: v for k, v in plan.observables.items() if k == "cos_theta_cm"}
        if not angle:
            raise CannotValidate("gen validate compares decayed samples on the production angle, which this process "
                                 "does not have; the decay chain is checked by the test suite (tests/test_decays.py)")
        return replace(plan, observables=angle, scale=plan.scale * self.chain.branching_ratio,
                       note="with decays: the total against the production's reference times the branching ratios "
                            f"({self.chain.branching_ratio:.6g}) and the production angle; energies, p_T and rapidities "
                            "shift with the Breit-Wigner masses and are not compared; the decays themselves are "
                            "checked by the test suite")
