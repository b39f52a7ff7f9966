"""A process ready to integrate: beams, matrix element, phase space and cuts as one integrand.

`build_process` turns a RunConfig into a `TwoToTwo`. Its `weights(x)` is the vegas integrand on the
unit hypercube (pb per unit volume); `momenta(x, rng)` makes the laboratory four-momenta of the
points x (incoming and outgoing, in the user's particle order). Everything is vectorized over
points; nothing here draws random numbers except the azimuth, from the generator it is given.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .card import RunConfig
from .constants import HBARC2_PB
from .errors import CardError
from .events import EventData, EventLayout
from .kinematics import AngularMap, boost_z, kallen, momentum_2body, two_body
from .matrix import MODELS, ProcessSpec, find_process
from .matrix.registry import choose_flows, flow_tags
from .particles import Species, species
from .phasespace import sequential

__all__ = ["TwoToTwo", "ManyBody", "build_process", "Beams", "process_label"]


@dataclass(frozen=True)
class Beams:
    """Laboratory momenta of the two incoming particles and what follows from them."""

    p1: np.ndarray  # (4,)
    p2: np.ndarray
    key: str  # the card key that set the energies, for error messages

    @property
    def sqrt_s(self) -> float:
        p = self.p1 + self.p2
        return math.sqrt(p[0] ** 2 - p[1] ** 2 - p[2] ** 2 - p[3] ** 2)

    @property
    def beta(self) -> float:
        """Speed of the centre-of-mass frame along +z in the laboratory."""
        p = self.p1 + self.p2
        return p[3] / p[0]


def _beams(cfg: RunConfig, m1: float, m2: float) -> Beams:
    col = cfg.collider
    src = cfg.source

    def along(e, m, sign, key):
        if e < m:
            raise CardError(src, key, f"beam energy {e:g} GeV is below the particle mass {m:g} GeV")
        return np.array([e, 0.0, 0.0, sign * math.sqrt(max(e * e - m * m, 0.0))])

    if "sqrt_s" in col:
        rs = float(col["sqrt_s"])
        e1 = (rs * rs + m1 * m1 - m2 * m2) / (2.0 * rs)
        if e1 < m1 or rs - e1 < m2:
            raise CardError(src, "collider.sqrt_s", f"{rs:g} GeV is below the incoming masses {m1:g} + {m2:g} GeV")
        return Beams(along(e1, m1, 1, "collider.sqrt_s"), along(rs - e1, m2, -1, "collider.sqrt_s"), "collider.sqrt_s")
    if "beam_energies" in col:
        e1, e2 = map(float, col["beam_energies"])
        k = "collider.beam_energies"
        return Beams(along(e1, m1, 1, k), along(e2, m2, -1, k), k)
    e1 = float(col["beam_energy"])
    k = "collider.beam_energy"
    return Beams(along(e1, m1, 1, k), np.array([m2, 0.0, 0.0, 0.0]), k)


def has_cuts(c: dict) -> bool:
    return (c["theta_min_deg"] > 0 or c["theta_max_deg"] < 180 or c["energy_min"] > 0
            or c["energy_max"] < math.inf or c["pt_min"] > 0 or c["pt_max"] < math.inf
            or c["mass_min"] > 0 or c["mass_max"] < math.inf or c.get("pair_mass_min", 0.0) > 0
            or c.get("eta_max", math.inf) < math.inf or c.get("rapidity_max", math.inf) < math.inf
            or c.get("delta_r_min", 0.0) > 0)


def _inv_mass(p):
    return np.sqrt(np.clip(p[..., 0] ** 2 - p[..., 1] ** 2 - p[..., 2] ** 2 - p[..., 3] ** 2, 0.0, None))


def cut_mask(cuts: dict, out: np.ndarray, selected: list[int]) -> np.ndarray:
    """True for events whose outgoing laboratory momenta out (N, n, 4) pass the cuts on `selected`."""
    ok = np.ones(out.shape[0], dtype=bool)
    sel = out[:, selected, :]
    e = sel[..., 0]
    pt = np.hypot(sel[..., 1], sel[..., 2])
    pabs = np.sqrt(pt * pt + sel[..., 3] ** 2)
    if cuts["theta_min_deg"] > 0.0 or cuts["theta_max_deg"] < 180.0:
        cos_t = np.divide(sel[..., 3], pabs, out=np.ones_like(pabs), where=pabs > 0)
        ok &= np.all((cos_t <= math.cos(math.radians(cuts["theta_min_deg"])))
                     & (cos_t >= math.cos(math.radians(cuts["theta_max_deg"]))), axis=1)
    if cuts["energy_min"] > 0.0 or cuts["energy_max"] < math.inf:
        ok &= np.all((e >= cuts["energy_min"]) & (e <= cuts["energy_max"]), axis=1)
    if cuts["pt_min"] > 0.0 or cuts["pt_max"] < math.inf:
        ok &= np.all((pt >= cuts["pt_min"]) & (pt <= cuts["pt_max"]), axis=1)
    if cuts["mass_min"] > 0.0 or cuts["mass_max"] < math.inf:
        m = _inv_mass(sel.sum(axis=1))
        ok &= (m >= cuts["mass_min"]) & (m <= cuts["mass_max"])
    if cuts.get("pair_mass_min", 0.0) > 0.0:
        for i in range(len(selected)):
            for j in range(i + 1, len(selected)):
                ok &= _inv_mass(sel[:, i] + sel[:, j]) >= cuts["pair_mass_min"]
    eta_cut, y_cut, dr_cut = cuts.get("eta_max", math.inf), cuts.get("rapidity_max", math.inf), cuts.get("delta_r_min", 0.0)
    if eta_cut < math.inf or dr_cut > 0.0:
        with np.errstate(divide="ignore", invalid="ignore"):  # along the beam: eta = +-inf (nan counts as outside)
            eta = np.nan_to_num(np.arcsinh(sel[..., 3] / pt), nan=np.inf)
        if eta_cut < math.inf:
            ok &= np.all(np.abs(eta) <= eta_cut, axis=1)
        if dr_cut > 0.0:
            phi = np.arctan2(sel[..., 2], sel[..., 1])
            for i in range(len(selected)):
                for j in range(i + 1, len(selected)):
                    dphi = np.abs(np.angle(np.exp(1j * (phi[:, i] - phi[:, j]))))
                    ok &= np.hypot(eta[:, i] - eta[:, j], dphi) >= dr_cut
    if y_cut < math.inf:
        with np.errstate(divide="ignore", invalid="ignore"):
            y = 0.5 * np.log((e + sel[..., 3]) / (e - sel[..., 3]))
        ok &= np.all(np.abs(np.nan_to_num(y, nan=np.inf)) <= y_cut, axis=1)
    return ok


def resolved_mass(cfg: RunConfig, sp: Species, model_masses: dict[str, float]) -> float:
    """A particle's mass: set by the model's parameters, else by the card, else PDG."""
    for name, m in model_masses.items():
        if abs(species(name).pdg) == abs(sp.pdg):
            return float(m)
    return float(cfg.masses.get(abs(sp.pdg), sp.mass))


class _FixedBeams:
    """What every process at fixed beam energies shares: the spec in canonical order, resolved
    parameters and masses, the beams, the threshold, the flux and the cuts."""

    def __init__(self, cfg: RunConfig):
        self.cfg = cfg
        model = MODELS[cfg.model]
        found = find_process(model, tuple(p.name for p in cfg.incoming), tuple(p.name for p in cfg.outgoing))
        assert found is not None  # the card checked it
        self.spec: ProcessSpec = found[0]
        self.in_perm, self.out_perm = found[1], found[2]
        self.params = model.resolve(cfg.parameters)
        model_masses = model.masses(self.params)
        for pdg in cfg.masses:
            for name in model_masses:
                if abs(species(name).pdg) == pdg:
                    raise CardError(cfg.source, f"parameters.masses.{name}",
                                    f"the {model.name} model sets this mass from its parameters; set it there")
        self.species: tuple[Species, ...] = tuple(cfg.incoming) + tuple(cfg.outgoing)
        self.masses = tuple(self._mass(sp, model_masses) for sp in self.species)
        # canonical particle k is the user's particle canonical[k]
        self.canonical = [self.in_perm[0], self.in_perm[1]] + [2 + i for i in self.out_perm]
        self.me_params = dict(self.params, **{f"m{k + 1}": self.masses[i] for k, i in enumerate(self.canonical)})
        self.beams = _beams(cfg, self.masses[0], self.masses[1])
        self.sqrt_s = self.beams.sqrt_s
        self.s = self.sqrt_s**2
        threshold = sum(self.masses[2:])
        if self.sqrt_s <= threshold:
            raise CardError(cfg.source, self.beams.key,
                            f"sqrt(s) = {self.sqrt_s:.6g} GeV is below the threshold {threshold:.6g} GeV of "
                            f"{' '.join(p.name for p in cfg.outgoing)}")
        self.beta = self.beams.beta
        self.p_in = momentum_2body(self.sqrt_s, self.masses[0], self.masses[1])
        # flux 1/(2 lambda^1/2(s, m1^2, m2^2))
        self.flux = 1.0 / (2.0 * math.sqrt(kallen(self.s, self.masses[0] ** 2, self.masses[1] ** 2)))
        self.selected = [i for i, sp in enumerate(cfg.outgoing)
                         if "particles" not in cfg.cuts or sp.name in cfg.cuts["particles"]]
        self.has_cuts = has_cuts(cfg.cuts)

    def _mass(self, sp: Species, model_masses: dict[str, float]) -> float:
        return resolved_mass(self.cfg, sp, model_masses)

    def cut_mask(self, out):
        """True for events whose outgoing particles (N, n, 4) pass the card's cuts."""
        return cut_mask(self.cfg.cuts, out, self.selected)

    def events(self, x, rng: np.random.Generator) -> EventData:
        return EventData(self.momenta(x, rng))

    def event_layout(self) -> EventLayout:
        return single_process_layout(self, 2)

    def record_sections(self) -> dict:
        """The process, collider and parameter sections of the file metadata."""
        return {"process": process_section(self), "parameters": parameter_section(self),
                "collider": {"sqrt_s_GeV": self.sqrt_s, "beam1_GeV": self.beams.p1.tolist(),
                             "beam2_GeV": self.beams.p2.tolist(), "cm_beta_z": self.beta}}


class TwoToTwo(_FixedBeams):
    """A 2->2 process at fixed beam energies: one integration variable, the mapped cos(theta*)."""

    ndim = 1

    def __init__(self, cfg: RunConfig):
        super().__init__(cfg)
        self.p_out = momentum_2body(self.sqrt_s, self.masses[2], self.masses[3])
        # flux times two-body phase space p_f/(8 pi sqrt s) dcos
        self.norm = HBARC2_PB * self.spec.symmetry * self.flux * self.p_out / (8.0 * math.pi * self.sqrt_s)
        # the user's first outgoing particle is the one at theta*; is it canonical p3?
        self.flip = self.out_perm[0] != 0
        self.in_flip = self.in_perm[0] != 0
        self.map = self._angular_map()
        self._flow_tags = flow_tags(self.spec.colour_flows, self.canonical, len(self.species))

    # --- angular variable ------------------------------------------------------------------
    def _angular_map(self) -> AngularMap:
        """The cos(theta*) range the cuts allow, and a map that follows the poles within it."""
        grid = np.linspace(-1.0, 1.0, 20001)
        ok = self.cut_mask(self._lab_outgoing(grid, np.zeros_like(grid)))
        if not ok.any():
            raise CardError(self.cfg.source, "cuts", "the cuts reject every event of this process at this energy")
        idx = np.flatnonzero(ok)
        # the edges of the allowed range, refined by bisection so that the integrand does not jump
        # to zero inside the mapped range (vegas underestimates its error on such steps)
        lo = grid[0] if idx[0] == 0 else self._edge(grid[idx[0] - 1], grid[idx[0]])
        hi = grid[-1] if idx[-1] == grid.size - 1 else self._edge(grid[idx[-1] + 1], grid[idx[-1]])
        spec = self.spec
        # the angle of canonical p3 against canonical p1 is the map's variable
        kind = spec.poles
        gap = 0.0 if spec.pole_gap is None else spec.pole_gap(self.s, tuple(self.me_params[f"m{i}"] for i in (1, 2, 3, 4)))
        if kind != "none" and gap <= 0.0:
            reach_f = kind in ("forward", "both") and hi >= 1.0
            reach_b = kind in ("backward", "both") and lo <= -1.0
            if reach_f or reach_b:
                raise CardError(self.cfg.source, "cuts.theta_min_deg",
                                f"{spec.label} has a {'forward' if reach_f else 'backward'} pole (massless exchange); "
                                "cut the scattering angle away from the beam (for example theta_min_deg = 10 and "
                                "theta_max_deg = 170)")
            gap = 0.0
        return AngularMap(kind, spec.pole_power, gap, float(lo), float(hi))

    def _edge(self, fail: float, ok: float) -> float:
        """The boundary between a rejected and an accepted cos(theta*), to the last bit; returns the accepted side."""
        for _ in range(64):
            mid = 0.5 * (fail + ok)
            if mid in (fail, ok):
                break
            if self.cut_mask(self._lab_outgoing(np.array([mid]), np.zeros(1)))[0]:
                ok = mid
            else:
                fail = mid
        return float(ok)

    # --- kinematics --------------------------------------------------------------------------
    def _cos_user(self, c):
        """cos(theta*) of the user's first outgoing particle against beam 1 from the canonical c."""
        return -c if self.flip != self.in_flip else c

    def _lab_outgoing(self, c, phi):
        """Laboratory momenta (N, 2, 4) of the outgoing particles in the user's order."""
        out = two_body(self.sqrt_s, self.masses[2], self.masses[3], self._cos_user(c), phi)
        return boost_z(out, self.beta)

    def _mandelstam(self, c):
        """s, t, u of the canonical order from the canonical cos(theta*) c (exact in the CM frame)."""
        m1, m2, m3, m4 = (self.me_params[k] for k in ("m1", "m2", "m3", "m4"))
        rs = self.sqrt_s
        e1 = (self.s + m1 * m1 - m2 * m2) / (2.0 * rs)
        e3 = (self.s + m3 * m3 - m4 * m4) / (2.0 * rs)
        pp = self.p_in * self.p_out
        t = m1 * m1 + m3 * m3 - 2.0 * (e1 * e3 - pp * c)
        u = m1 * m1 + m4 * m4 - 2.0 * (e1 * (rs - e3) + pp * c)
        return np.full_like(c, self.s), t, u

    # --- integrand and events ------------------------------------------------------------------
    def weights(self, x):
        """Weights (pb) of points x of shape (N, 1): sigma = mean of the weights over uniform x."""
        c, jac = self.map(x[:, 0])
        s, t, u = self._mandelstam(c)
        w = self.norm * jac * self.spec.matrix(s, t, u, self.me_params)
        if self.has_cuts:
            w = np.where(self.cut_mask(self._lab_outgoing(c, np.zeros_like(c))), w, 0.0)
        return w

    def events(self, x, rng: np.random.Generator) -> EventData:
        """Momenta, and for a process with several colour flows each event's flow, chosen in
        proportion to the leading-colour weights at its point."""
        flows = self.spec.flows
        if len(flows) < 2:
            return EventData(self.momenta(x, rng))
        p = self.momenta(x, rng)
        s, t, u = self._mandelstam(self.map(x[:, 0])[0])
        choice = choose_flows(flows, s, t, u, self.me_params, rng.random(x.shape[0]))
        return EventData(p, colour=self._flow_tags[choice, :, 0], anticolour=self._flow_tags[choice, :, 1])

    def momenta(self, x, rng: np.random.Generator):
        """Laboratory momenta (N, 4, 4) for points x: incoming then outgoing, in the user's order."""
        n = x.shape[0]
        c, _ = self.map(x[:, 0])
        phi = rng.random(n) * (2.0 * math.pi)
        p = np.empty((n, 4, 4))
        p[:, 0, :] = self.beams.p1
        p[:, 1, :] = self.beams.p2
        p[:, 2:, :] = self._lab_outgoing(c, phi)
        return p


class ManyBody(_FixedBeams):
    """2 -> n at fixed beam energies (n >= 3): sequential-splitting phase space on [0, 1]^(3n - 4).

    The |M|^2 of the spec takes the canonical momenta in the centre-of-mass frame; the cuts act on
    the laboratory momenta. Massless infrared regions must be cut away by the card's cuts.
    """

    def __init__(self, cfg: RunConfig):
        super().__init__(cfg)
        self.n_out = len(cfg.outgoing)
        self.ndim = 3 * self.n_out - 4
        if self.spec.needs_angular_cut and cfg.cuts.get("pair_mass_min", 0.0) <= 0.0:
            raise CardError(cfg.source, "cuts.pair_mass_min",
                            f"{self.spec.label} has soft and collinear singularities; keep every pair of partons "
                            f"apart in invariant mass, for example pair_mass_min = {0.1 * self.sqrt_s:.4g} "
                            "(0.1 sqrt(s), a y cut of 0.01)")
        if self.has_cuts and not np.any(self.cut_mask(self._lab_outgoing(np.random.default_rng(0).random((20000, self.ndim)))[0])):
            raise CardError(cfg.source, "cuts", "the cuts reject every event of this process at this energy")
        e1 = (self.s + self.masses[0] ** 2 - self.masses[1] ** 2) / (2.0 * self.sqrt_s)
        self._p1 = np.array([e1, 0.0, 0.0, self.p_in])
        self._p2 = np.array([self.sqrt_s - e1, 0.0, 0.0, -self.p_in])

    def _lab_outgoing(self, x):
        """Outgoing momenta (N, n, 4): centre-of-mass frame and laboratory, and the phase-space weight."""
        cm, w_ps = sequential(x, self.sqrt_s, self.masses[2:])
        return boost_z(cm.copy(), self.beta), cm, w_ps

    def weights(self, x):
        lab, cm, w_ps = self._lab_outgoing(x)
        n = x.shape[0]
        full = np.empty((n, 2 + self.n_out, 4))
        full[:, 0], full[:, 1], full[:, 2:] = self._p1, self._p2, cm
        me = self.spec.momentum_matrix(full[:, self.canonical], self.me_params)
        w = HBARC2_PB * self.spec.symmetry * self.flux * me * w_ps
        if self.has_cuts:
            w = np.where(self.cut_mask(lab), w, 0.0)
        return w

    def momenta(self, x, rng: np.random.Generator):
        """Laboratory momenta (N, 2 + n, 4); the orientation is part of x, so rng is not used."""
        lab, _, _ = self._lab_outgoing(x)
        p = np.empty((x.shape[0], 2 + self.n_out, 4))
        p[:, 0, :] = self.beams.p1
        p[:, 1, :] = self.beams.p2
        p[:, 2:, :] = lab
        return p


class DecayAtRest:
    """One particle decaying at rest into two or three: the integral over [0, 1]^(3n - 4) is its
    partial width Gamma = (1/2m) int |M|^2 dPhi_n in GeV (sequential phase space; the orientation is
    part of x). The file's weights and its `*_pb` fields then hold GeV; the record's `measure` says so."""

    measure = {"quantity": "partial width", "unit": "GeV"}

    def __init__(self, cfg: RunConfig):
        self.cfg = cfg
        model = MODELS[cfg.model]
        found = find_process(model, (cfg.incoming[0].name,), tuple(p.name for p in cfg.outgoing))
        assert found is not None  # the card checked it
        self.spec, _, self.out_perm = found
        self.params = model.resolve(cfg.parameters)
        model_masses = model.masses(self.params)
        self.species = tuple(cfg.incoming) + tuple(cfg.outgoing)
        self.masses = tuple(resolved_mass(cfg, sp, model_masses) for sp in self.species)
        self.m = self.masses[0]
        self.sqrt_s = self.m
        if self.m <= sum(self.masses[1:]):
            raise CardError(cfg.source, "process.outgoing", f"{' '.join(p.name for p in cfg.outgoing)} is heavier than "
                            f"{cfg.incoming[0].name} ({self.m:g} GeV)")
        self.n_out = len(cfg.outgoing)
        self.ndim = 3 * self.n_out - 4
        self.canonical = [0] + [1 + i for i in self.out_perm]
        self.me_params = dict(self.params, **{f"m{k + 1}": self.masses[i] for k, i in enumerate(self.canonical)})
        self.selected = [i for i, sp in enumerate(cfg.outgoing)
                         if "particles" not in cfg.cuts or sp.name in cfg.cuts["particles"]]
        self.has_cuts = has_cuts(cfg.cuts)
        self.p_parent = np.array([self.m, 0.0, 0.0, 0.0])

    def _momenta(self, x):
        out, w_ps = sequential(x, self.m, self.masses[1:])
        p = np.empty((x.shape[0], 1 + self.n_out, 4))
        p[:, 0] = self.p_parent
        p[:, 1:] = out
        return p, w_ps

    def weights(self, x):
        p, w_ps = self._momenta(x)
        me = self.spec.momentum_matrix(p[:, self.canonical], self.me_params)
        w = self.spec.symmetry * me * w_ps / (2.0 * self.m)
        if self.has_cuts:
            w = np.where(cut_mask(self.cfg.cuts, p[:, 1:], self.selected), w, 0.0)
        return w

    def momenta(self, x, rng):
        return self._momenta(x)[0]

    def events(self, x, rng) -> EventData:
        return EventData(self.momenta(x, rng))

    def event_layout(self) -> EventLayout:
        return single_process_layout(self, 1)

    def record_sections(self) -> dict:
        return {"process": process_section(self), "parameters": parameter_section(self),
                "collider": {"at_rest": True, "sqrt_s_GeV": self.m, "beam1_GeV": self.p_parent.tolist(), "cm_beta_z": 0.0}}


def single_process_layout(proc, n_in: int) -> EventLayout:
    """The layout of a run of one process: its particles in card order, outgoing ones children of
    the incoming, the spec's single colour flow (canonical particle k is the card's proc.canonical[k])."""
    n = len(proc.species)
    tags = flow_tags(proc.spec.colour_flows, proc.canonical, n)[0]  # several flows: events() chooses per event
    return EventLayout(
        pdg=np.array([p.pdg for p in proc.species], np.int32),
        roles=["incoming"] * n_in + ["outgoing"] * (n - n_in),
        parent_first=np.array([-1] * n_in + [0] * (n - n_in), np.int16),
        parent_last=np.array([-1] * n_in + [n_in - 1] * (n - n_in), np.int16),
        colour=tags[:, 0], anticolour=tags[:, 1], mass=np.array(proc.masses, np.float64),
        subprocesses=[process_label(proc.cfg)], scale=proc.sqrt_s, alpha_em=float(proc.params.get("alpha", 0.0)),
        alpha_s=proc.params.get("alpha_s"))


def process_section(proc) -> dict:
    cfg = proc.cfg
    return {"model": cfg.model, "incoming": [p.name for p in cfg.incoming], "outgoing": [p.name for p in cfg.outgoing],
            "label": process_label(cfg), "symmetry_factor": proc.spec.symmetry,
            "source": " ".join(proc.spec.source.split())}


def parameter_section(proc) -> dict:
    return {"model": dict(proc.params), "masses_GeV": {p.name: m for p, m in zip(proc.species, proc.masses)},
            "widths_GeV": {p.name: proc.cfg.widths.get(abs(p.pdg), p.width) for p in proc.species}}


def process_label(cfg: RunConfig) -> str:
    return f"{' '.join(p.name for p in cfg.incoming)} -> {' '.join(p.name for p in cfg.outgoing)}"


def build_process(cfg: RunConfig):
    """The integrand object for a validated card (raises CardError for impossible kinematics):
    a `TwoToTwo` or `ManyBody` at fixed beam energies, or a `gen.hadron.HadronCollision`."""
    if cfg.incoming[0].is_hadron:
        from .hadron import HadronCollision

        proc = HadronCollision(cfg)
    elif len(cfg.incoming) == 1:
        proc = DecayAtRest(cfg)
    elif len(cfg.outgoing) > 2:
        proc = ManyBody(cfg)
    else:
        proc = TwoToTwo(cfg)
    if cfg.decays:
        from .decays import WithDecays

        return WithDecays(proc)
    return proc
