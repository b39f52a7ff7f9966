"""Phase space along the propagators of an amplitude: binary decay trees with mapped invariant
masses, and their multi-channel combination.

A `Topology` splits the centre-of-mass system into two parts, each part again into two, down to
the outgoing particles. Each internal node's invariant mass s is drawn through a map of
`gen.physics.kinematics` (a Breit-Wigner for a resonance, a 1/s power for a massless propagator
with a lower bound from the cuts, flat otherwise) and each splitting's angles flat in its rest
frame, so that dPhi_n = prod_nodes ds/(2 pi) x prod_splittings p*/(4 pi M) dOmega/(4 pi); there are
3n - 4 variables (n - 2 masses, then two angles per splitting), as for `sequential`.

At hadron colliders the root splitting (in the parton frame, the z axis along the beams) may
instead draw its polar angle through the pseudorapidity eta* = atanh(cos theta) of its first part,
flat within the range where the parts' common p_T = p* / cosh(eta*) stays above a cut
(`Topology.root_pt_min`): the density in cos theta then goes as 1 / sin^2 theta, the shape of a
t- and u-channel exchange, and no point falls below the p_T cut of a single particle there.

`MultiChannel` combines topologies (Kleiss & Pittau, Comput. Phys. Commun. 83 (1994) 141): an
extra variable picks a channel i with probability alpha_i, the point is made by that channel, and
its weight is f / sum_j alpha_j g_j with g_j the density of channel j at the same momenta, which
depends only on the invariant masses, so it is computed without inverting the angles. The
result is unbiased for any alpha; vegas, adapting the extra variable, tunes the alpha.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .kinematics import BreitWignerMap, FlatMap, PowerMap, mass, two_body_decay

__all__ = ["Node", "Topology", "MultiChannel"]


@dataclass(frozen=True)
class Node:
    """An internal node: the outgoing particles below it (sorted), its two children (nodes or
    particle indices) and the map of its invariant mass squared (ignored at the root)."""

    leaves: tuple[int, ...]
    children: tuple["Node | int", "Node | int"]
    smap: object = field(default_factory=FlatMap)
    #: smallest s the map may draw (above the natural threshold): a pair-mass cut
    s_min: float = 0.0


def _per_point(sqrt_s, n: int) -> np.ndarray:
    """sqrt(s) as an array (n,): one value for all points, or one per point (hadron collisions)."""
    return np.array(np.broadcast_to(np.asarray(sqrt_s, float), (n,)))


def _leaves(c) -> tuple[int, ...]:
    return (c,) if isinstance(c, int) else c.leaves


class Topology:
    """One decay tree over n outgoing particles with masses `masses` (GeV)."""

    def __init__(self, root: Node, masses, name: str = "", root_pt_min: float = 0.0):
        self.root = root
        #: the p_T bound (GeV) of the root splitting's parts, 0 for a flat polar angle there
        self.root_pt_min = float(root_pt_min)
        self.masses = np.asarray(masses, float)
        self.n = self.masses.size
        self.name = name or self.describe()
        self.order: list[Node] = []  # internal nodes, parents before children
        stack = [root]
        while stack:
            node = stack.pop(0)
            self.order.append(node)
            stack.extend(c for c in node.children if not isinstance(c, int))
        self.ndim = 3 * self.n - 4

    def describe(self) -> str:
        """The tree as nested parentheses of outgoing slots; an internal node's mass map follows
        it: "~91.2" for a resonance of that mass, "/s" for a 1/s (massless-line) map."""
        def tag(c):
            smap = c.smap
            if isinstance(smap, BreitWignerMap):
                return f"~{smap.mass:.4g}"
            return "/s" if isinstance(smap, PowerMap) else ""

        def d(c, top=False):
            if isinstance(c, int):
                return str(c)
            return "(" + " ".join(d(x) for x in c.children) + ")" + ("" if top else tag(c))
        return d(self.root, top=True)

    def _min_mass(self, c) -> float:
        return float(self.masses[list(_leaves(c))].sum())

    def _child_range(self, node: Node, k: int, m_parent, ms, n_pts: int):
        """The s range of child k, as `generate` draws it: from its threshold (or cut) to
        (M - m_sibling)^2, the sibling at its threshold for the first child and at its drawn mass
        (ms[0]) for the second."""
        c = node.children[k]
        sib = ms[0] if k == 1 else np.full(n_pts, self._min_mass(node.children[0 if k else 1]))
        return max(self._min_mass(c) ** 2, c.s_min), (m_parent - sib) ** 2

    def _eta_max(self, m_parent, m1, m2) -> np.ndarray:
        """The |eta*| bound of the root splitting: acosh(p* / root_pt_min), 0 where p* is below it
        (the point then has zero weight)."""
        safe = np.where(m_parent > 0, m_parent, 1.0)
        a, b = m1 / safe, m2 / safe
        pstar = safe * np.sqrt(np.clip((1.0 - (a + b) ** 2) * (1.0 - (a - b) ** 2), 0.0, None)) / 2.0
        return np.arccosh(np.maximum(pstar / self.root_pt_min, 1.0))

    def generate(self, x: np.ndarray, sqrt_s):
        """Momenta (N, n, 4) in the centre-of-mass frame of energy sqrt_s (a number, or one per
        point) and weights (N,), or zero weight where the point cannot be made (a bound crossed)."""
        n_pts = x.shape[0]
        out = np.zeros((n_pts, self.n, 4))
        weight = np.ones(n_pts)
        root = _per_point(sqrt_s, n_pts)
        moms = {id(self.root): np.zeros((n_pts, 4))}
        moms[id(self.root)][:, 0] = root
        m_of = {id(self.root): root}
        mcol, acol = 0, self.n - 2
        for node in self.order:
            m_parent = m_of[id(node)]
            ms = []
            for k, c in enumerate(node.children):
                if isinstance(c, int):
                    ms.append(np.full(n_pts, self.masses[c]))
                    continue
                lo, hi = self._child_range(node, k, m_parent, ms, n_pts)
                ok = hi > lo
                hi_s = np.where(ok, hi, lo + 1.0)
                s, jac = c.smap(x[:, mcol], lo, hi_s)
                mcol += 1
                weight = np.where(ok, weight * jac / (2.0 * math.pi), 0.0)
                ms.append(np.sqrt(np.maximum(s, 0.0)))
            if node is self.root and self.root_pt_min > 0.0:
                eta_max = self._eta_max(m_parent, ms[0], ms[1])
                cos_t = np.tanh(eta_max * (2.0 * x[:, acol] - 1.0))
                weight = weight * eta_max * (1.0 - cos_t * cos_t)
            else:
                cos_t = 2.0 * x[:, acol] - 1.0
            phi = 2.0 * math.pi * x[:, acol + 1]
            acol += 2
            p1, p2, ratio = two_body_decay(moms[id(node)], m_parent, ms[0], ms[1], cos_t, phi)
            weight = weight * ratio / (4.0 * math.pi)
            for c, p, m in zip(node.children, (p1, p2), ms):
                if isinstance(c, int):
                    out[:, c] = p
                else:
                    moms[id(c)], m_of[id(c)] = p, m
        return out, weight

    def density(self, p: np.ndarray, sqrt_s) -> np.ndarray:
        """1/weight of this topology at momenta p (N, n, 4): the density with which `generate` makes
        them from uniform points (0 where it cannot)."""
        n_pts = p.shape[0]
        w = np.ones(n_pts)
        m_of = {id(self.root): _per_point(sqrt_s, n_pts)}
        for node in self.order:
            m_parent = m_of[id(node)]
            ms = []
            for k, c in enumerate(node.children):
                if isinstance(c, int):
                    ms.append(np.full(n_pts, self.masses[c]))
                    continue
                s = np.maximum(mass(p[:, list(c.leaves)].sum(axis=1)), 0.0) ** 2
                lo, hi = self._child_range(node, k, m_parent, ms, n_pts)
                inside = (s >= lo) & (s <= hi) & (hi > lo)
                jac = c.smap.jacobian(s, lo, np.where(hi > lo, hi, lo + 1.0))
                w = np.where(inside, w * jac / (2.0 * math.pi), 0.0)
                ms.append(np.sqrt(s))
                m_of[id(c)] = ms[-1]
            a, b = ms[0] / m_parent, ms[1] / m_parent
            ratio = np.sqrt(np.clip((1.0 - (a + b) ** 2) * (1.0 - (a - b) ** 2), 0.0, None)) / 2.0
            w = w * ratio / (4.0 * math.pi)
            if node is self.root and self.root_pt_min > 0.0:
                first = p[:, list(_leaves(node.children[0]))].sum(axis=1)
                pabs = np.sqrt((first[:, 1:] ** 2).sum(axis=1))
                cos_t = np.divide(first[:, 3], pabs, out=np.zeros(n_pts), where=pabs > 0)
                eta_max = self._eta_max(m_parent, ms[0], ms[1])
                inside = np.abs(np.arctanh(np.clip(cos_t, -1.0, 1.0))) <= eta_max
                w = np.where(inside, w * eta_max * (1.0 - cos_t * cos_t), 0.0)
        with np.errstate(divide="ignore"):
            return np.where(w > 0, 1.0 / np.where(w > 0, w, 1.0), 0.0)


class MultiChannel:
    """Several topologies of one final state; the first variable picks the channel."""

    def __init__(self, topologies: list[Topology]):
        self.topologies = topologies
        self.k = len(topologies)
        self.ndim = topologies[0].ndim + (1 if self.k > 1 else 0)
        self.alpha = np.full(self.k, 1.0 / self.k)

    def generate(self, x: np.ndarray, sqrt_s):
        """Momenta, the phase-space weight 1 / sum_j alpha_j g_j, and the channel of each point."""
        if self.k == 1:
            p, w = self.topologies[0].generate(x, sqrt_s)
            return p, w, np.zeros(x.shape[0], np.int64)
        sqrt_s = _per_point(sqrt_s, x.shape[0])
        ch = np.minimum((x[:, 0] * self.k).astype(np.int64), self.k - 1)
        rest = x[:, 1:]
        p = np.zeros((x.shape[0], self.topologies[0].n, 4))
        own = np.zeros(x.shape[0])
        for i, top in enumerate(self.topologies):
            sel = ch == i
            if sel.any():
                p[sel], own[sel] = top.generate(rest[sel], sqrt_s[sel])
        live = own > 0
        g = np.zeros(x.shape[0])
        for i, top in enumerate(self.topologies):
            g[live] += self.alpha[i] * top.density(p[live], sqrt_s[live])
        w = np.zeros(x.shape[0])
        w[live] = 1.0 / g[live]
        return p, w, ch

    def shares(self, p: np.ndarray, sqrt_s) -> np.ndarray:
        """(N, k): the part alpha_i g_i / sum_j alpha_j g_j of each channel in the density at
        momenta p (N, n, 4) -- how much of a point's weight each channel's map accounts for."""
        sqrt_s = _per_point(sqrt_s, p.shape[0])
        g = np.stack([a * top.density(p, sqrt_s) for a, top in zip(self.alpha, self.topologies)], axis=1)
        tot = g.sum(axis=1, keepdims=True)
        return np.divide(g, tot, out=np.zeros_like(g), where=tot > 0)

    def sampled_fractions(self, nodes) -> np.ndarray:
        """(k,): the share of points an adapted vegas map (the nodes of the channel-picking
        variable) sends to each channel: its adapted channel weight."""
        nodes = np.asarray(nodes, float)
        y = np.interp(np.arange(self.k + 1) / self.k, nodes, np.linspace(0.0, 1.0, nodes.size))
        return np.diff(y)
