"""Squared tree amplitudes of one process from a model file: the recursion summed or sampled over
helicities and colours, and the leading-colour flows of events.

`TreeAmplitude.squared(p)` is sum |M|^2 averaged over the spins and colours of the incoming
particles (no symmetry factor for identical outgoing particles), at momenta p (N, n, 4) in the
order of the legs (incoming, then outgoing).

Colour is summed over an orthonormal basis of external colour states: a quark's three colours,
and for a gluon the nine matrices (e_ij - delta_ij/3)/sqrt(2) (the traceless projection of the
colour-flow basis, whose squares sum to those of the eight t^a). Assignments that break colour
conservation are left out, the rest are grouped by the permutations of the three colour labels
(which leave |M|^2 unchanged) and each group is evaluated once with its size as weight.
Helicities are summed over the states of each leg; configurations that vanish at a probe point
(helicity conservation of massless fermions) are left out. Either sum may be replaced by
sampling one configuration per point (`helicities = "sample"`, `colours = "sample"`), an
unbiased estimate with a larger variance.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from ..particles import species
from .model import ckm_from, load
from .recursion import Leg, Recursion

__all__ = ["TreeAmplitude", "ProcessRefused", "colour_lines", "FlowChooser", "OrderedFlows", "flow_chooser"]


class ProcessRefused(ValueError):
    """The model has no tree amplitude for these particles; the message names the rule broken."""


_PERMS = list(itertools.permutations(range(3)))
#: the exact colour sum is used (colours = "auto") up to this many classes of colour assignments
EXACT_COLOUR_CLASSES = 120
#: helicity configurations probed while setting up the exact colour sum (the largest ones to find
#: the colour classes that vanish, random ones for the colour basis, with more points instead)
COLOUR_PROBE_HELICITIES = 4


def _states(leg: Leg):
    rep = leg.colour
    if rep == 1:
        return [None]
    if abs(rep) == 3:
        return [0, 1, 2]
    return [(i, j) for i in range(3) for j in range(3)]


def _balanced(legs, assignment) -> bool:
    up, down = [], []
    for leg, c in zip(legs, assignment):
        rep = leg.colour
        if rep == 3:
            up.append(c)
        elif rep == -3:
            down.append(c)
        elif rep == 8 and c[0] != c[1]:
            up.append(c[0])
            down.append(c[1])
    return sorted(up) == sorted(down)


def _permute(assignment, perm):
    out = []
    for c in assignment:
        if c is None:
            out.append(None)
        elif isinstance(c, tuple):
            out.append((perm[c[0]], perm[c[1]]))
        else:
            out.append(perm[c])
    return tuple(out)


def conservation(legs: Sequence[Leg]) -> str | None:
    """The conservation rule the legs break (as incoming particles), or None."""
    sps = [species(leg.label) for leg in legs]
    if abs(sum(sp.charge for sp in sps)) > 1e-9:
        return "electric charge is not conserved"
    if sum(sp.quark_number for sp in sps) != 0:
        return "quark number (three times the baryon number) is not conserved"
    lep = [sum(sp.lepton_numbers[g] for sp in sps) for g in range(3)]
    if any(lep):
        return "lepton number of each generation is not conserved"
    n3 = sum(1 for sp in sps if abs(sp.colour) == 3)
    n8 = sum(1 for sp in sps if sp.colour == 8)
    if n3 == 0 and n8 == 1:
        return "colour is not conserved (a single gluon with colourless particles)"
    return None


@dataclass(frozen=True)
class _Config:
    hels: tuple[int, ...]
    cols: tuple
    weight: float


def _mirror_half(configs) -> list | None:
    """One configuration of each mirror pair (every helicity flipped), or None when the
    configurations do not come in such pairs."""
    kept = set(configs)
    half = [h for h in configs if h < tuple(-x for x in h)]
    if len(half) * 2 != len(kept) or any(tuple(-x for x in h) not in kept for h in half):
        return None
    return half


class TreeAmplitude:
    """Squared amplitudes of `incoming -> outgoing` in a model file (see the module docstring).

    `params` are the resolved model parameters; `mass_of` and `width_of` give each particle's mass
    and width in GeV as the run uses them; `width_scheme` is "fixed" or "complex_mass".
    """

    def __init__(self, model: str, incoming: Sequence[str], outgoing: Sequence[str], params: Mapping[str, object],
                 mass_of: Callable[[str], float], width_of: Callable[[str], float], width_scheme: str = "fixed",
                 helicities: str = "sum", colours: str = "auto", seed: int = 12345,
                 resonances: Sequence[tuple[Sequence[str], str]] = (), colour_ordered: bool = True):
        self.model = load(model)
        self.incoming, self.outgoing = tuple(incoming), tuple(outgoing)
        self.legs = tuple([Leg(n, True, mass_of(n)) for n in incoming] + [Leg(n, False, mass_of(n)) for n in outgoing])
        unknown = [leg.name for leg in self.legs if leg.name not in self.model.field_names]
        if unknown:
            raise ProcessRefused(f"the {self.model.name} model has no particle {unknown[0]!r}; it has "
                                 + ", ".join(sorted(self.model.field_names)))
        why = conservation(self.legs)
        if why:
            raise ProcessRefused(why)
        names = sorted(self.model.field_names)
        masses = {n: mass_of(n) for n in names}
        widths = {n: width_of(n) for n in names}
        self.complex_mass = width_scheme == "complex_mass"
        vertices = self.model.numeric(params, width_scheme, mass_of, ckm_from(params))
        n_in = len(self.incoming)
        #: resonances the diagrams must go through, as (mask over the legs, particle)
        self.resonances = tuple((sum(1 << (n_in + k) for k in outs), parent) for outs, parent in resonances)
        self.recursion = Recursion(self.legs, vertices, masses, widths, self.complex_mass,
                                   resonances=self.resonances)
        if not self.recursion.exists:
            raise ProcessRefused(f"the {self.model.name} model has no tree diagram for this process"
                                 + (" through the resonances asked for" if resonances else ""))
        self.helicity_mode, self.colour_mode = helicities, colours
        self.average = 1.0
        for leg in self.legs[:len(self.incoming)]:
            self.average /= len(leg.helicities) * {1: 1, 3: 3, -3: 3, 8: 8}[leg.colour]
        self._vertices = vertices
        self.ordered = self._gluon_path(vertices) if colour_ordered else None
        self.alpha_s = float(params.get("alpha_s", 0.0) or 0.0)
        self.strong_powers = self._strong_powers(params, width_scheme, mass_of) if self.alpha_s > 0 else {}
        used = {id(j.vertex) for js in self.recursion.joins.values() for j in js}
        #: True when some vertex of the amplitude couples by alpha_s (the amplitude runs with it)
        self.strong = any(k in used for k in self.strong_powers)
        self._setup(seed)

    def _gluon_path(self, vertices):
        """The colour-ordered evaluator (`gen.physics.tree.ordered`) for 4 to 7 gluons and nothing
        else, when the model's gluon self-couplings are those of QCD (|c4| = |c3|^2: the coupling
        g = |c3| is then read off them), else None; with colours = "sample" the general recursion."""
        if self.colour_mode == "sample" or not 4 <= len(self.legs) <= 7 or any(leg.name != "g" for leg in self.legs):
            return None
        c3 = [v.couplings[0] for v in vertices if v.form == "vector-cubic" and set(v.legs) == {"g"}]
        c4 = [v.couplings[0] for v in vertices if v.form == "vector-quartic" and set(v.legs) == {"g"}]
        if len(c3) != 1 or len(c4) != 1 or abs(abs(c4[0]) - abs(c3[0]) ** 2) > 1e-12 * abs(c4[0]):
            return None
        from .ordered import GluonOrdered

        self.gluon_coupling = abs(c3[0])
        return GluonOrdered(len(self.legs))

    def _strong_powers(self, params, width_scheme, mass_of) -> dict[int, float]:
        """The power q of alpha_s in each vertex's couplings (c proportional to alpha_s^q), by id of
        the vertex, for vertices with q > 0: read off by evaluating the couplings at 4 alpha_s."""
        raised = self.model.numeric(dict(params, alpha_s=4.0 * self.alpha_s), width_scheme, mass_of, ckm_from(params))
        out: dict[int, float] = {}
        for v, w in zip(self._vertices, raised):
            qs = {round(math.log(abs(b / a)) / math.log(4.0), 9) for a, b in zip(v.couplings, w.couplings) if a != 0}
            if len(qs) != 1 or any(abs(b - a * 4.0 ** next(iter(qs))) > 1e-9 * abs(b)
                                   for a, b in zip(v.couplings, w.couplings)):
                raise ProcessRefused(f"the couplings of vertex {v.name!r} of the {self.model.name} model are not one "
                                     "power of alpha_s, so they cannot run per event")
            q = qs.pop()
            if q != 0:
                out[id(v)] = q
        return out

    # --- configurations --------------------------------------------------------------------------
    def _setup(self, seed: int) -> None:
        legs = self.legs
        p = self.probe_momenta(seed, 3)
        ext = self._externals(p)
        moms = self._moms(p)
        hels = list(itertools.product(*(leg.helicities for leg in legs)))
        self.colour_count = float(balanced_count(legs))
        if self.ordered is not None:
            self._setup_ordered(p, ext, moms, hels, seed)
            return
        n_coloured = sum(1 for leg in legs if leg.colour != 1)
        classes = self._classes() if n_coloured <= 5 else None
        if self.colour_mode == "auto":
            self.colour_mode = "sum" if classes is not None and len(classes) <= EXACT_COLOUR_CLASSES else "sample"
        if self.colour_mode == "sum" and classes is None:
            raise ProcessRefused(f"{n_coloured} coloured particles are too many for the exact colour sum; sample "
                                 "the colours instead")
        rng = np.random.default_rng(seed)
        if classes is not None and len(classes) <= EXACT_COLOUR_CLASSES:
            probes = sorted(classes, key=lambda c: -classes[c])[:4]
        else:
            drawn = self._draw_colours(rng, 4)
            probes = [tuple(None if c is None else (tuple(int(x[k]) for x in c) if isinstance(c, tuple) else int(c[k]))
                            for c in drawn) for k in range(4)]
        cache: dict = {}
        size = np.zeros(len(hels))
        for col in probes:
            size += np.array([float((np.abs(self._amp(ext, moms, h, col, cache)) ** 2).sum()) for h in hels])
        keep_h = [h for h, v in zip(hels, size) if v > 1e-24 * size.max()] if size.any() else hels
        self.helicity_configs = keep_h
        if self.colour_mode == "sum":
            # whether a colour class vanishes is colour algebra: the largest helicities tell
            top_h = [hels[k] for k in np.argsort(-size)[:COLOUR_PROBE_HELICITIES]]
            csize = {col: sum(float((np.abs(self._amp(ext, moms, h, col, cache)) ** 2).sum()) for h in top_h)
                     for col in classes}
            top = max(csize.values()) if csize else 0.0
            self.colour_classes = [(c, float(classes[c])) for c in classes if top == 0.0 or csize[c] > 1e-24 * top]
            self._colour_basis(seed)
            self._summed_parity(ext, moms, cache)
        else:
            self.colour_classes = []

    def _summed_parity(self, ext, moms, cache) -> None:
        """The helicity configurations the exact sums evaluate: one of each mirror pair (every
        helicity flipped) when the colour-summed |M|^2 of the two agree at the set-up's probe
        points to 1e-10, counted twice. With vector-like couplings and massless partons (QCD, QED) a
        flip conjugates every amplitude up to one phase and the colour matrix is real, so they agree;
        chiral couplings (the Z, the W) or masses break it, the probe sees that and all are kept."""
        self.summed_configs, self.summed_factor = list(self.helicity_configs), 1.0
        half = _mirror_half(self.helicity_configs)
        if half is None:
            return

        def summed(h):
            return self._colour_summed([self._amp(ext, moms, h, c, cache) for c in self.colour_basis])

        for h in half:
            if not np.allclose(summed(h), summed(tuple(-x for x in h)), rtol=1e-10, atol=1e-300):
                return
        self.summed_configs, self.summed_factor = half, 2.0

    def _setup_ordered(self, p, ext, moms, hels, seed: int) -> None:
        """Helicity configurations of the colour-ordered path (those not vanishing at the probe
        points) and its reduced set of orderings; the colour sum is exact."""
        size = np.array([float(self.ordered.colour_summed(self._ordered_amps(ext, moms, h)).sum()) for h in hels])
        self.helicity_configs = [h for h, v in zip(hels, size) if v > 1e-24 * size.max()] if size.any() else hels
        # parity: flipping every helicity conjugates each colour-ordered amplitude up to one phase,
        # so |M|^2 is the same; one configuration of each pair is evaluated, counted twice
        half = _mirror_half(self.helicity_configs)
        self.parity_configs, self.parity_factor = (list(self.helicity_configs), 1.0) if half is None else (half, 2.0)
        from .ordered import GluonOrdered

        q = self.probe_momenta(seed + 1, 12)
        ext_q, moms_q = self._externals(q), self._moms(q)
        samples = [([ext_q[(i, h[i])] for i in range(len(self.legs))], moms_q) for h in self.helicity_configs[:24]]
        self.ordered = GluonOrdered.reduced(len(self.legs), samples)
        self.colour_mode = "sum"
        self.colour_classes = []
        self.colour_basis = []

    def _ordered_amps(self, ext, moms, hels):
        """Colour-ordered amplitudes (K, N) of one helicity configuration (per point where hels
        holds arrays)."""
        states = []
        for i, leg in enumerate(self.legs):
            h = hels[i]
            if np.ndim(h) == 0:
                states.append(ext[(i, int(h))])
            else:
                states.append(sum(np.where((h == k)[None], ext[(i, k)], 0.0) for k in leg.helicities))
        return self.ordered.amplitudes(states, moms)

    def _colour_basis(self, seed: int) -> None:
        """Find a few colour classes whose amplitudes give every other class's by a fixed linear map
        (the amplitude lives in the space of colour-invariant tensors, whose dimension is small), and
        the Hermitian matrix G with sum_classes w |M_c|^2 = a^dagger G a over those few amplitudes a.
        The map is colour algebra alone: it is found from amplitudes at random points and helicities
        and checked to rounding on others."""
        classes = [c for c, _ in self.colour_classes]
        w = np.array([wt for _, wt in self.colour_classes])
        if len(classes) <= 2:
            self.colour_basis, self.colour_matrix = classes, np.diag(w).astype(complex)
            return
        # columns of samples: points x helicities, several times the dimension of the colour space
        n_pts = max(4, len(classes) // COLOUR_PROBE_HELICITIES + 1)
        p = self.probe_momenta(seed + 1, n_pts)
        ext, moms = self._externals(p), self._moms(p)
        rng = np.random.default_rng(seed)
        hels = self.helicity_configs
        pick = [hels[k] for k in rng.permutation(len(hels))[:COLOUR_PROBE_HELICITIES]]
        cache: dict = {}
        samples = np.concatenate([np.stack([self._amp(ext, moms, h, c, cache) for c in classes]) for h in pick], axis=1)
        scale = np.abs(samples).max(axis=1, keepdims=True)
        scale[scale == 0] = 1.0
        # greedy pivoting on the normalized rows: classes that add a new direction
        normed = samples / scale
        basis: list[int] = []
        q = np.zeros((0, normed.shape[1]), complex)
        for i in np.argsort(-np.linalg.norm(normed, axis=1)):
            r = normed[i] - (q.conj() @ normed[i]) @ q if len(q) else normed[i].copy()
            nr = np.linalg.norm(r)
            if nr > 1e-8 * np.linalg.norm(normed[i]):
                basis.append(int(i))
                q = np.vstack([q, r / nr])
        sub = samples[basis]
        rmap, *_ = np.linalg.lstsq(sub.T, samples.T, rcond=None)  # samples.T = sub.T @ rmap
        rmap = rmap.T  # (classes, K)
        err = np.abs(rmap @ sub - samples).max() / max(np.abs(samples).max(), 1e-300)
        if err > 1e-8:
            self.colour_basis, self.colour_matrix = classes, np.diag(w).astype(complex)
            return
        self.colour_basis = [classes[i] for i in basis]
        self.colour_matrix = rmap.conj().T @ (w[:, None] * rmap)

    def _classes(self) -> dict[tuple, int]:
        """Colour-conserving assignments grouped by permutations of the three colour labels: {representative: size}."""
        legs = self.legs
        classes: dict[tuple, int] = {}
        for a in itertools.product(*(_states(leg) for leg in legs)):
            if not _balanced(legs, a):
                continue
            canon = min(_permute(a, p) for p in _PERMS)
            classes[canon] = classes.get(canon, 0) + 1
        return classes

    def _draw_colours(self, rng: np.random.Generator, n: int):
        """Per-leg colour states (index arrays) of n colour-conserving assignments, uniformly drawn."""
        legs = self.legs
        out = [None if leg.colour == 1 else (np.zeros(n, int) if abs(leg.colour) == 3
                                              else (np.zeros(n, int), np.zeros(n, int))) for leg in legs]
        todo = np.arange(n)
        while todo.size:
            net = np.zeros((todo.size, 3), int)
            draw = []
            for leg in legs:
                if leg.colour == 1:
                    draw.append(None)
                elif abs(leg.colour) == 3:
                    c = rng.integers(3, size=todo.size)
                    np.add.at(net, (np.arange(todo.size), c), 1 if leg.colour == 3 else -1)
                    draw.append(c)
                else:
                    i, j = rng.integers(3, size=todo.size), rng.integers(3, size=todo.size)
                    np.add.at(net, (np.arange(todo.size), i), 1)
                    np.add.at(net, (np.arange(todo.size), j), -1)
                    draw.append((i, j))
            ok = ~net.any(axis=1)
            for k, leg in enumerate(legs):
                if draw[k] is None:
                    continue
                if abs(leg.colour) == 3:
                    out[k][todo[ok]] = draw[k][ok]
                else:
                    out[k][0][todo[ok]] = draw[k][0][ok]
                    out[k][1][todo[ok]] = draw[k][1][ok]
            todo = todo[~ok]
        return tuple(out)

    def probe_momenta(self, seed: int, n: int) -> np.ndarray:
        """Random momenta (n, legs, 4) conserving momentum, well inside the phase space, in a generic frame
        (for probes and tests)."""
        from ..phasespace import rambo

        rng = np.random.default_rng(seed)
        m = [leg.mass for leg in self.legs]
        n_in = len(self.incoming)
        if n_in == 1:
            sqrt_s = m[0]
        else:
            sqrt_s = 2.0 * (sum(m[n_in:]) + m[0] + m[1] + 50.0)
        out, _ = rambo(rng, n, sqrt_s, m[n_in:])
        p = np.zeros((n, len(m), 4))
        if n_in == 1:
            p[:, 0, 0] = m[0]
        else:
            from ..kinematics import two_body_momentum

            q = two_body_momentum(sqrt_s, m[0], m[1])
            e1 = math.sqrt(q * q + m[0] ** 2)
            p[:, 0] = (e1, 0.0, 0.0, q)
            p[:, 1] = (sqrt_s - e1, 0.0, 0.0, -q)
        p[:, n_in:] = out
        # a generic frame: a random rotation and boost, so that no configuration vanishes by the
        # accident of beams along an axis (helicity states of massive particles depend on the frame)
        axis = rng.normal(size=3)
        axis /= np.linalg.norm(axis)
        angle = rng.uniform(0.3, 2.8)
        k = np.array([[0, -axis[2], axis[1]], [axis[2], 0, -axis[0]], [-axis[1], axis[0], 0]])
        rot = np.eye(3) + math.sin(angle) * k + (1 - math.cos(angle)) * (k @ k)
        p[..., 1:] = p[..., 1:] @ rot.T
        beta = rng.normal(size=3)
        beta *= 0.3 / np.linalg.norm(beta)
        g = 1.0 / math.sqrt(1.0 - 0.09)
        bp = p[..., 1:] @ beta
        e = p[..., 0].copy()
        p[..., 0] = g * (e + bp)
        p[..., 1:] = p[..., 1:] + ((g - 1.0) * bp / 0.09 + g * e)[..., None] * beta
        return p

    # --- evaluation ------------------------------------------------------------------------------
    def _moms(self, p):
        return [p[:, i, :].T if leg.incoming else -p[:, i, :].T for i, leg in enumerate(self.legs)]

    def _externals(self, p):
        """Spin parts of every leg's external state for each helicity: {(leg, hel): (L, N)}."""
        rec = self.recursion
        out = {}
        for i, leg in enumerate(self.legs):
            pt = np.ascontiguousarray(p[:, i, :].T)
            for h in leg.helicities:
                # a colourless state; colour is dressed on per configuration
                out[(i, h)] = rec.external(i, pt, h, None) if leg.colour == 1 else self._spin(i, pt, h)
        return out

    def _spin(self, i, pt, h):
        rec = self.recursion
        saved = rec.legs[i]
        # the spin part alone: the external state of a colourless stand-in of the same spin
        from . import external

        sp = species(saved.name)
        if sp.spin2 == 1:
            if sp.pdg > 0:
                s = external.u_spinor(pt, saved.mass, h)
                return s if saved.incoming else external.bar(s)
            s = external.v_spinor(pt, saved.mass, h)
            return external.bar(s) if saved.incoming else s
        e = external.polarization(pt, saved.mass, h)
        return e if saved.incoming else np.conj(e)

    def _amp(self, ext, moms, hels, cols, cache):
        rec = self.recursion
        states = [rec.dress(ext[(i, h)], leg.colour, c) if leg.colour != 1 else ext[(i, h)]
                  for i, (leg, h, c) in enumerate(zip(self.legs, hels, cols))]
        per_leg = tuple(zip(hels, cols))

        def key(mask):
            return tuple(per_leg[i] for i in range(self.recursion.n) if mask >> i & 1)

        return rec.amplitude(states, moms, cache, key)

    def squared(self, p: np.ndarray, rng: np.random.Generator | None = None,
                alpha_s: np.ndarray | None = None) -> np.ndarray:
        """Averaged sum |M|^2 (N,) at momenta p (N, n, 4); rng draws the sampled configurations.
        `alpha_s` (N,), when given, is the strong coupling of each point (else the parameters')."""
        rec = self.recursion
        if self.ordered is not None:
            g2 = self.gluon_coupling ** 2 if alpha_s is None else 4.0 * math.pi * np.asarray(alpha_s, float)
            return self._ordered_squared(p, rng) * g2 ** (len(self.legs) - 2)
        if alpha_s is not None and self.strong:
            ratio = np.asarray(alpha_s, float) / self.alpha_s
            rec.vertex_scale = {k: ratio ** q for k, q in self.strong_powers.items()}
        try:
            return self._squared(p, rng)
        finally:
            rec.vertex_scale = {}

    def _ordered_squared(self, p: np.ndarray, rng: np.random.Generator | None) -> np.ndarray:
        """Averaged sum |M|^2 / g^(2(n-2)) by the colour-ordered path: over the helicity
        configurations, or one drawn per point."""
        ext = self._externals(p)
        moms = self._moms(p)
        hels, factor = self.parity_configs, self.parity_factor
        if self.helicity_mode == "sample" and len(hels) > 1:
            rng = rng or np.random.default_rng()
            hi = rng.integers(len(hels), size=p.shape[0])
            table = np.array(hels)
            per_leg = tuple(table[hi, i] for i in range(len(self.legs)))
            summed = self.ordered.colour_summed(self._ordered_amps(ext, moms, per_leg))
            return self.average * factor * len(hels) * summed
        total = np.zeros(p.shape[0])
        for h in hels:
            total += self.ordered.colour_summed(self._ordered_amps(ext, moms, h))
        return self.average * factor * total

    def _squared(self, p: np.ndarray, rng: np.random.Generator | None) -> np.ndarray:
        n = p.shape[0]
        ext = self._externals(p)
        moms = self._moms(p)
        hel_sample = self.helicity_mode == "sample" and len(self.helicity_configs) > 1
        col_sample = self.colour_mode == "sample"
        if not hel_sample and not col_sample:
            total = np.zeros(n)
            cache: dict = {}
            for h in self.summed_configs:
                total += self._colour_summed([self._amp(ext, moms, h, c, cache) for c in self.colour_basis])
            return self.average * self.summed_factor * total
        rng = rng or np.random.default_rng()
        hels = self.helicity_configs
        if hel_sample:
            hi = rng.integers(len(hels), size=n)
            hel_list = [tuple(np.array([hels[k][i] for k in range(len(hels))])[hi] for i in range(len(self.legs)))]
            hel_factor = float(len(hels))
        else:
            hel_list, hel_factor = hels, 1.0
        total = np.zeros(n)
        if col_sample:
            cols = self._draw_colours(rng, n)
            for h in hel_list:
                total += self.colour_count * np.abs(self._amp_per_point(ext, moms, p, h, cols)) ** 2
        else:
            for h in hel_list:
                total += self._colour_summed([self._amp_per_point(ext, moms, p, h, c) for c in self.colour_basis])
        return self.average * hel_factor * total

    def draw_helicities(self, p: np.ndarray, rng: np.random.Generator) -> np.ndarray:
        """One helicity configuration per point (N, n, 4), drawn in proportion to its |M|^2 there
        (summed over colours, or at one sampled colour assignment), as helicities in units of hbar
        (N, n) float32: the labels of the external states, which are physical helicities (HELAS
        conventions, `gen.physics.tree.external`)."""
        from ..matrix.registry import draw_index

        n = p.shape[0]
        ext = self._externals(p)
        moms = self._moms(p)
        if self.ordered is not None:  # a configuration of each parity pair, then one of the pair at random
            table = np.array(self.parity_configs, float)
            w = [self.ordered.colour_summed(self._ordered_amps(ext, moms, h)) for h in self.parity_configs]
            k = draw_index(np.stack(w), rng.random(n))
            flip = np.where(rng.random(n) < 0.5 * (self.parity_factor - 1.0), -1.0, 1.0)
            return (table[k] * flip[:, None] * self._helicity_unit()).astype(np.float32)
        if self.colour_mode == "sample":
            cols = self._draw_colours(rng, n)
            w = [np.abs(self._amp_per_point(ext, moms, p, h, cols)) ** 2 for h in self.helicity_configs]
        else:
            cache: dict = {}
            w = [self._colour_summed([self._amp(ext, moms, h, c, cache) for c in self.colour_basis])
                 for h in self.helicity_configs]
        k = draw_index(np.stack(w), rng.random(n))
        return (np.array(self.helicity_configs, float) * self._helicity_unit())[k].astype(np.float32)

    def _helicity_unit(self) -> np.ndarray:
        """hbar per unit of each leg's helicity label: 1/2 for fermions, 1 otherwise."""
        return np.array([0.5 if species(leg.name).spin2 == 1 else 1.0 for leg in self.legs])

    def _colour_summed(self, amps) -> np.ndarray:
        """sum over colour classes of w |M|^2 from the basis classes' amplitudes (K, N)."""
        a = np.stack(amps)
        g = self.colour_matrix
        if len(a) == 1:
            return g[0, 0].real * np.abs(a[0]) ** 2
        return np.einsum("kn,kl,ln->n", a.conj(), g, a).real

    def _amp_per_point(self, ext, moms, p, hels, cols):
        rec = self.recursion
        states = []
        for i, leg in enumerate(self.legs):
            h = hels[i]
            if np.ndim(h) == 0:
                spin = ext[(i, int(h))]
            else:
                spin = sum(np.where((h == k)[None], ext[(i, k)], 0.0) for k in leg.helicities)
            states.append(spin if leg.colour == 1 else rec.dress(spin, leg.colour, cols[i]))
        return rec.amplitude(states, moms)


def balanced_count(legs: Sequence[Leg]) -> int:
    """The number of colour-conserving assignments of external colour states (the weight of a
    sampled one), by counting the net colour charge leg by leg."""
    counts: dict[tuple[int, int, int], int] = {(0, 0, 0): 1}
    for leg in legs:
        if leg.colour == 1:
            continue
        steps = []
        if abs(leg.colour) == 3:
            sign = 1 if leg.colour == 3 else -1
            steps = [tuple(sign * (k == c) for k in range(3)) for c in range(3)]
        else:
            steps = [tuple((k == i) - (k == j) for k in range(3)) for i in range(3) for j in range(3)]
        new: dict[tuple[int, int, int], int] = {}
        for net, c in counts.items():
            for st in steps:
                key = (net[0] + st[0], net[1] + st[1], net[2] + st[2])
                new[key] = new.get(key, 0) + c
        counts = new
    return counts.get((0, 0, 0), 0)


def colour_lines(legs: Sequence[Leg]) -> tuple[list[tuple[int, int]], list[tuple[int, int]]]:
    """The colour ends of the legs: (leg, 0) for a quark-like end (a column, or a gluon's first
    index) and (leg, 1) for an antiquark-like end (a row, or a gluon's second index)."""
    ups, downs = [], []
    for i, leg in enumerate(legs):
        if leg.colour == 3:
            ups.append((i, 0))
        elif leg.colour == -3:
            downs.append((i, 1))
        elif leg.colour == 8:
            ups.append((i, 0))
            downs.append((i, 1))
    return ups, downs


class FlowChooser:
    """Leading-colour flows of a process and the choice of one per event.

    A flow connects every quark-like colour end (an incoming quark, an outgoing antiquark, a
    gluon's first index) to an antiquark-like end (an incoming antiquark, an outgoing quark, a
    gluon's second index), no gluon to itself. Its amplitude is the recursion's with one colour
    label per line, colour-flow gluons and no 1/N terms (Maltoni, Paul, Stelzer & Willenbrock,
    Phys. Rev. D 67 (2003) 014026); an event gets flow k with probability proportional to
    sum_helicities |A_k|^2 at its point. Tags are 1 + the line number, in the record's convention
    (an incoming particle's colour is the line it brings in).
    """

    #: beyond this many flows one is drawn uniformly instead (the amplitudes would cost too much)
    MAX_FLOWS = 120

    def __init__(self, amp: TreeAmplitude):
        legs = amp.legs
        self.amp = amp
        self.ups, self.downs = colour_lines(legs)
        self.flows = []
        if self.ups:
            for perm in itertools.permutations(range(len(self.downs))):
                if any(self.ups[k][0] == self.downs[perm[k]][0] for k in range(len(self.ups))):
                    continue  # a gluon joined to itself
                self.flows.append(perm)
        d = max(len(self.ups), 1)
        self.recursion = Recursion(legs, amp._vertices, amp.recursion.masses, amp.recursion.widths,
                                   amp.complex_mass, dim=d, leading=True,
                                   resonances=amp.resonances) if self.flows else None
        self.tags = np.zeros((max(len(self.flows), 1), len(legs), 2), np.int32)
        self.states = []
        for f, perm in enumerate(self.flows):
            col: list = [None] * len(legs)
            for k, (leg_up, _) in enumerate(self.ups):
                leg_dn = self.downs[perm[k]][0]
                self._put(col, leg_up, 0, k)
                self._put(col, leg_dn, 1, k)
                self.tags[f, leg_up, self._slot(legs[leg_up], 0)] = k + 1
                self.tags[f, leg_dn, self._slot(legs[leg_dn], 1)] = k + 1
            states = []
            for leg, c in zip(legs, col):
                if c is None:
                    states.append(None)
                elif leg.colour == 8:
                    states.append(tuple(c))
                else:
                    states.append(c[0] if c[0] is not None else c[1])
            self.states.append(tuple(states))

    @staticmethod
    def _put(col, leg, end, label):
        """Set the colour label of one end of a leg: a quark's index, or one of a gluon's pair."""
        if col[leg] is None:
            col[leg] = [None, None]
        col[leg][end] = label

    @staticmethod
    def _slot(leg: Leg, end: int) -> int:
        """The record's slot (0 colour, 1 anticolour) of a colour end: quark-like ends are the colour
        of an incoming particle and the anticolour of an outgoing one, antiquark-like the reverse."""
        return (0 if leg.incoming else 1) if end == 0 else (1 if leg.incoming else 0)

    def choose(self, p: np.ndarray, rng: np.random.Generator) -> np.ndarray:
        """The flow index of each event at momenta p (N, n, 4)."""
        n = p.shape[0]
        if len(self.flows) < 2:
            return np.zeros(n, np.int64)
        if len(self.flows) > self.MAX_FLOWS:
            return rng.integers(len(self.flows), size=n)
        amp = self.amp
        ext = amp._externals(p)
        moms = amp._moms(p)
        weights = np.zeros((len(self.flows), n))
        cache: dict = {}
        for f, cols in enumerate(self.states):
            for h in amp.helicity_configs:
                states = [self.recursion.dress(ext[(i, hh)], leg.colour, c) if leg.colour != 1 else ext[(i, hh)]
                          for i, (leg, hh, c) in enumerate(zip(amp.legs, h, cols))]
                per_leg = tuple(zip(h, cols))

                def key(mask, per_leg=per_leg):
                    return tuple(per_leg[i] for i in range(len(per_leg)) if mask >> i & 1)

                weights[f] += np.abs(self.recursion.amplitude(states, moms, cache, key)) ** 2
        from ..matrix.registry import draw_index

        return draw_index(weights, rng.random(n))


class OrderedFlows:
    """Leading-colour flows of a gluon amplitude on the colour-ordered path: one per ordering (a
    ring of colour lines through the gluons in that order), drawn in proportion to sum_h |A_sigma|^2
    at the event (the same choice as `FlowChooser`, whose flow amplitudes these are)."""

    def __init__(self, amp: TreeAmplitude):
        self.amp = amp
        n = len(amp.legs)
        rings = [tuple(o) + (n - 1,) for o in amp.ordered.trace_orderings]
        self.flows = rings
        self.tags = np.zeros((len(rings), n, 2), np.int32)
        for f, ring in enumerate(rings):
            for k in range(n):  # line k + 1 runs from gluon ring[k] (second index) to ring[k + 1] (first)
                a, b = amp.legs[ring[k]], amp.legs[ring[(k + 1) % n]]
                self.tags[f, ring[k], FlowChooser._slot(a, 1)] = k + 1
                self.tags[f, ring[(k + 1) % n], FlowChooser._slot(b, 0)] = k + 1

    def choose(self, p: np.ndarray, rng: np.random.Generator) -> np.ndarray:
        from ..matrix.registry import draw_index

        amp = self.amp
        ext, moms = amp._externals(p), amp._moms(p)
        w = sum(np.abs(amp.ordered.trace_amplitudes(amp._ordered_amps(ext, moms, h))) ** 2
                for h in amp.parity_configs)
        return draw_index(w, rng.random(p.shape[0]))


def flow_chooser(amp: TreeAmplitude):
    """The flow choice of an amplitude: `OrderedFlows` on the colour-ordered path, else `FlowChooser`."""
    return OrderedFlows(amp) if amp.ordered is not None else FlowChooser(amp)
