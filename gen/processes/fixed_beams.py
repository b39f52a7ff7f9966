"""Processes at fixed beam energies: beams, matrix element, phase space and cuts as one integrand.

`TwoToTwo` has one integration variable, the mapped cos(theta*); `ManyBody` (2 -> n, n >= 3)
the sequential-splitting phase space on [0, 1]^(3n - 4), or for three light particles with a
pair-mass cut the log-mapped pair masses of the third with the other two and the orientation.
Both make the laboratory four-momenta of their points (incoming and outgoing, in the card's
particle order); nothing here draws random numbers except the azimuth of a 2 -> 2 event, from
the generator it is given.
"""

from __future__ import annotations

import math

import numpy as np

from ..card import CUT_DEFAULTS, RunConfig
from ..errors import CardError
from ..physics.constants import HBARC2_PB
from ..physics.kinematics import AngularMap, boost_z, mandelstam_tu, mass, rapidity_of, two_body, two_body_momentum
from ..physics.matrix.registry import choose_flows
from ..physics.phasespace import sequential, three_massless
from ..physics.quadrature import legendre_grid
from ..physics.references import REFERENCES
from . import observables
from .base import SpecProcess
from .interface import CannotValidate, Channel, EventData, ValidationPlan

__all__ = ["TwoToTwo", "ManyBody"]

#: outgoing masses below this fraction of the pair-mass cut count as massless for three-body maps
LIGHT_FRACTION = 1e-3


class FixedBeams(SpecProcess):
    """What every process at fixed beam energies shares: the beams, the flux and the frame."""

    def __init__(self, cfg: RunConfig):
        super().__init__(cfg)
        self.beam1, self.beam2 = (np.array(b, float) for b in cfg.resolved.beams)
        total = self.beam1 + self.beam2
        self.sqrt_s = float(mass(total))
        self.s = self.sqrt_s**2
        #: rapidity of the centre-of-mass frame in the laboratory
        self.y_cm = rapidity_of(total[0], total[3])
        self.p_in = two_body_momentum(self.sqrt_s, self.masses[0], self.masses[1])
        # flux 1/(2 lambda^1/2(s, m1^2, m2^2)) with lambda^1/2 = 2 p_in sqrt(s)
        self.flux = 1.0 / (4.0 * self.p_in * self.sqrt_s)

    def _scale(self) -> float:
        return self.sqrt_s

    def _beams_into(self, p: np.ndarray) -> np.ndarray:
        p[:, 0, :] = self.beam1
        p[:, 1, :] = self.beam2
        return p

    def record_sections(self) -> dict:
        return {"process": self.process_section(), "parameters": self.parameter_section(),
                "collider": {"sqrt_s_GeV": self.sqrt_s, "beam1_GeV": self.beam1.tolist(),
                             "beam2_GeV": self.beam2.tolist(), "cm_beta_z": math.tanh(self.y_cm),
                             "cm_rapidity": self.y_cm}}

    def _reference(self):
        spec = self.spec
        if spec.reference is None or spec.reference not in REFERENCES:
            raise CannotValidate(f"no analytic reference for {spec.label} in the {spec.model} model; validation covers: "
                                 + ", ".join(sorted(REFERENCES)))
        return REFERENCES[spec.reference]


class TwoToTwo(FixedBeams):
    """A 2 -> 2 process at fixed beam energies: one integration variable, the mapped cos(theta*)
    of canonical p3 against canonical p1 in the centre-of-mass frame."""

    def __init__(self, cfg: RunConfig):
        super().__init__(cfg)
        self.channels = (Channel("cos theta*", 1),)
        self.p_out = two_body_momentum(self.sqrt_s, self.masses[2], self.masses[3])
        # flux times two-body phase space p_f/(8 pi sqrt s) dcos
        self.norm = HBARC2_PB * self.spec.symmetry * self.flux * self.p_out / (8.0 * math.pi * self.sqrt_s)
        self.angles = self._angular_map()

    # --- the angular variable ------------------------------------------------------------------
    def _angular_map(self) -> AngularMap:
        """The cos(theta*) range the cuts allow, and a map that follows the poles within it."""
        grid = np.linspace(-1.0, 1.0, 20001)
        ok = self.cuts.mask(self._lab_outgoing(grid, np.zeros_like(grid)))
        if not ok.any():
            raise CardError(self.cfg.source, "cuts", "the cuts reject every event of this process at this energy")
        idx = np.flatnonzero(ok)
        # the edges of the allowed range, refined by bisection so that the integrand does not jump
        # to zero inside the mapped range (vegas underestimates its error on such steps)
        lo = grid[0] if idx[0] == 0 else self._edge(grid[idx[0] - 1], grid[idx[0]])
        hi = grid[-1] if idx[-1] == grid.size - 1 else self._edge(grid[idx[-1] + 1], grid[idx[-1]])
        spec = self.spec
        poles = spec.poles
        gap = 0.0 if spec.pole_gap is None else spec.pole_gap(self.s, tuple(self.me_params[f"m{i}"] for i in (1, 2, 3, 4)))
        if poles != "none" and gap <= 0.0:
            reach_f = poles in ("forward", "both") and hi >= 1.0
            reach_b = poles in ("backward", "both") and lo <= -1.0
            if reach_f or reach_b:
                raise CardError(self.cfg.source, "cuts.theta_min_deg",
                                f"{spec.label} has a {'forward' if reach_f else 'backward'} pole (massless exchange); "
                                "cut the scattering angle away from the beam (for example theta_min_deg = 10 and "
                                "theta_max_deg = 170)")
            gap = 0.0
        return AngularMap(poles, spec.pole_power, gap, float(lo), float(hi))

    def _edge(self, fail: float, ok: float) -> float:
        """The boundary between a rejected and an accepted cos(theta*), to the last bit; returns the accepted side."""
        for _ in range(64):
            mid = 0.5 * (fail + ok)
            if mid in (fail, ok):
                break
            if self.cuts.mask(self._lab_outgoing(np.array([mid]), np.zeros(1)))[0]:
                ok = mid
            else:
                fail = mid
        return float(ok)

    # --- kinematics ----------------------------------------------------------------------------
    def _lab_outgoing(self, c, phi):
        """Laboratory momenta (N, 2, 4) of the outgoing particles in the card's order, from the
        canonical cos(theta*) c; the card's first outgoing particle is at -c when t and u swap."""
        cos_card = -c if self.ordering.t_u_swapped else c
        return boost_z(two_body(self.sqrt_s, self.masses[2], self.masses[3], cos_card, phi), self.y_cm)

    def _invariants(self, x):
        """(c, s, t, u, dc/dx) of the canonical order at points x (N, 1)."""
        c, one_minus, one_plus, jac = self.angles.with_complements(x[:, 0])
        m = [self.me_params[f"m{i}"] for i in (1, 2, 3, 4)]
        t, u = mandelstam_tu(self.s, *m, one_minus, one_plus)
        return c, np.full_like(c, self.s), t, u, jac

    # --- integrand and events ------------------------------------------------------------------
    def weights(self, x):
        """Weights (pb) of points x of shape (N, 1): sigma = mean of the weights over uniform x."""
        c, s, t, u, jac = self._invariants(x)
        w = self.norm * jac * self.spec.matrix(s, t, u, self.me_params)
        if self.cuts.active:
            w = np.where(self.cuts.mask(self._lab_outgoing(c, np.zeros_like(c))), w, 0.0)
        return w

    def events(self, x, rng: np.random.Generator) -> EventData:
        """Momenta, and for a process with several colour flows each event's flow, chosen in
        proportion to the leading-colour weights at its point."""
        n = x.shape[0]
        c, s, t, u, _ = self._invariants(x)
        phi = rng.random(n) * (2.0 * math.pi)
        p = self._beams_into(np.empty((n, 4, 4)))
        p[:, 2:, :] = self._lab_outgoing(c, phi)
        flows = self.spec.flows
        if len(flows) < 2:
            return EventData(p)
        choice = choose_flows(flows, s, t, u, self.me_params, rng.random(n))
        return EventData(p, colour=self.flow_tags[choice, :, 0], anticolour=self.flow_tags[choice, :, 1])

    # --- validation ----------------------------------------------------------------------------
    def validation(self, claimed=None) -> ValidationPlan:
        """dsigma/dcos of the spec's analytic reference on a fine Gauss-Legendre grid in cos(theta*),
        with the card's cuts; observables of the card's first outgoing particle."""
        ref = self._reference()
        par, s = self.claimed_me_params(claimed), self.s

        def reference(level: int):
            c, w = legendre_grid(self.angles.lo, self.angles.hi, 20000 * level, 6)
            w = w * ref.density(c, s, par)
            lab = self._lab_outgoing(c, np.zeros_like(c))
            return np.where(self.cuts.mask(lab), w, 0.0), observables.first_particle(lab[:, 0, :], self.y_cm)

        names = ("cos_theta_cm", "pt", "rapidity", "energy")
        return ValidationPlan(ref.name, " ".join(ref.source.split()), {k: observables.LABELS[k] for k in names},
                              reference, lambda p: observables.first_particle(p[:, 2, :], self.y_cm),
                              accuracy=ref.accuracy(s, par))


class ManyBody(FixedBeams):
    """2 -> n at fixed beam energies (n >= 3): sequential-splitting phase space on [0, 1]^(3n - 4).

    The |M|^2 of the spec takes the canonical momenta in the centre-of-mass frame; the cuts act on
    the laboratory momenta. Massless infrared regions must be cut away by the card's cuts.
    """

    def __init__(self, cfg: RunConfig):
        super().__init__(cfg)
        self.n_out = len(cfg.outgoing)
        cut = cfg.cuts.get("pair_mass_min", 0.0)
        #: three light particles with a pair-mass cut: the invariants of the canonical third (the
        #: gluon of q qbar g) with the other two, log-mapped (`three_massless`); masses below
        #: LIGHT_FRACTION of the cut (light quarks, whose |M|^2 is massless) are then set to zero,
        #: in the kinematics and the record
        self.dalitz = self.n_out == 3 and cut > 0 and all(m < LIGHT_FRACTION * cut for m in self.masses[2:])
        self.y_min = cut * cut / self.s
        if self.dalitz:
            self.masses = self.masses[:2] + (0.0,) * 3
            self.me_params = dict(self.params, **{f"m{k + 1}": self.masses[i] for k, i in enumerate(self.canonical)})
        self.channels = (Channel("pair masses with the third, orientation" if self.dalitz else "sequential splittings",
                                 3 * self.n_out - 4),)
        if self.cuts.active and not np.any(self.cuts.mask(self._outgoing(np.random.default_rng(0).random(
                (20000, self.ndim)))[0])):
            raise CardError(cfg.source, "cuts", "the cuts reject every event of this process at this energy")
        e1 = (self.s + self.masses[0] ** 2 - self.masses[1] ** 2) / (2.0 * self.sqrt_s)
        self._p1_cm = np.array([e1, 0.0, 0.0, self.p_in])
        self._p2_cm = np.array([self.sqrt_s - e1, 0.0, 0.0, -self.p_in])

    def _outgoing(self, x):
        """Outgoing momenta (N, n, 4) in the laboratory and in the centre-of-mass frame, and the phase-space weight."""
        if self.dalitz:
            gen, w_ps = three_massless(x, self.sqrt_s, self.y_min)
            cm = np.empty_like(gen)
            cm[:, [c - 2 for c in self.canonical[2:]]] = gen  # canonical outgoing k is card slot canonical[2 + k]
        else:
            cm, w_ps = sequential(x, self.sqrt_s, self.masses[2:])
        return boost_z(cm, self.y_cm), cm, w_ps

    def weights(self, x):
        lab, cm, w_ps = self._outgoing(x)
        full = np.empty((x.shape[0], 2 + self.n_out, 4))
        full[:, 0], full[:, 1], full[:, 2:] = self._p1_cm, self._p2_cm, cm
        me = self.spec.momentum_matrix(full[:, self.canonical], self.me_params)
        w = HBARC2_PB * self.spec.symmetry * self.flux * me * w_ps
        if self.cuts.active:
            w = np.where(self.cuts.mask(lab), w, 0.0)
        return w

    def events(self, x, rng: np.random.Generator) -> EventData:
        """Laboratory momenta (N, 2 + n, 4); the orientation is part of x, so rng is not used."""
        lab, _, _ = self._outgoing(x)
        p = self._beams_into(np.empty((x.shape[0], 2 + self.n_out, 4)))
        p[:, 2:, :] = lab
        return EventData(p)

    def validation(self, claimed=None) -> ValidationPlan:
        """dsigma/dx1 dx2 of the reference over the massless Dalitz triangle (x1 in [0, 1], x2 in
        [1 - x1, 1]) on a Gauss-Legendre grid, with the Lorentz-invariant pair-mass cut only."""
        ref = self._reference()
        cuts = self.cfg.cuts
        others = [k for k, v in cuts.items() if k not in ("pair_mass_min", "particles") and v != CUT_DEFAULTS[k]]
        if others or "particles" in cuts:
            raise CannotValidate("validation of three-parton samples supports the Lorentz-invariant cuts.pair_mass_min "
                                 "on all partons only; this card also cuts on " + ", ".join(others or ["particles"]))
        par = dict(self.claimed_me_params(claimed), charge=self.species[self.canonical[2]].charge)
        s = self.s
        y_min = cuts["pair_mass_min"] ** 2 / s

        def reference(level: int):
            u, wu = legendre_grid(0.0, 1.0, 300 * level, 4)
            x1, v = np.repeat(u, u.size), np.tile(u, u.size)
            wt = np.repeat(wu, u.size) * np.tile(wu, u.size) * x1  # dx2 = x1 dv
            x2 = 1.0 - x1 + x1 * v
            x3 = 2.0 - x1 - x2
            ok = (1 - x1 >= y_min) & (1 - x2 >= y_min) & (1 - x3 >= y_min) & (x1 < 1) & (x2 < 1)
            w = np.where(ok, wt * ref.density(np.where(ok, x1, 0.5), np.where(ok, x2, 0.5), s, par), 0.0)
            return w, {"x_quark": x1, "x_antiquark": x2, "x_gluon": x3}

        idx = self.canonical[2:5]
        names = ("x_quark", "x_antiquark", "x_gluon")
        return ValidationPlan(ref.name, " ".join(ref.source.split()), {k: observables.LABELS[k] for k in names},
                              reference, lambda p: observables.energy_fractions(p, self.y_cm, self.sqrt_s, idx),
                              accuracy=ref.accuracy(s, par))
