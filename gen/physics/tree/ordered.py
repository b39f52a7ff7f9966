"""Amplitudes of gluons only by colour-ordered currents: the fast path of `TreeAmplitude` for
g g -> n g.

The full amplitude is a sum over the orderings of the gluons with the last gluon fixed,

    M = g^(n-2) sum_sigma Tr(T^a_sigma(1) ... T^a_sigma(n-1) T^a_n) A(sigma(1), ..., sigma(n-1), n),

Tr T^a T^b = delta^ab, with colour-ordered amplitudes A that carry no colour at all: Berends &
Giele's recursion over contiguous sub-sequences of an ordering, with the colour-ordered vertices
of Dixon, hep-ph/9601359 (eqs. 11-12 and 27),

    V3(P, Q) J1 J2 = (i/sqrt2) [(J1.J2)(P - Q) + 2 (Q.J1) J2 - 2 (P.J2) J1],
    V4 J1 J2 J3    = (i/2) [2 (J1.J3) J2 - (J2.J3) J1 - (J1.J2) J3],  propagator -i/P^2.

Every sub-sequence of the first n-1 gluons is one current shared by all orderings that contain
it, and all currents of one length are computed together as arrays (sequences x points). Only
the (n-2)! orderings with gluon 0 first are evaluated (`reduced`); the others follow from them by
the Kleiss-Kuijf relations, whose integer matrix is solved once from sample points. The
colour sum is sum_{sigma, tau} A_sigma^* C_sigma,tau A_tau with C = N^(index loops of the two
traces), the U(N) contraction: the 1/N terms of SU(N) multiply sums of A over the insertions of a
U(1) gluon, which vanish (the photon decoupling identity, same source), so C is exact here.
"""

from __future__ import annotations

import itertools
import math

import numpy as np

__all__ = ["GluonOrdered", "colour_matrix"]

N_COLOURS = 3


def _dot(a, b):
    """Minkowski product over axis 1 of (S, 4, N) arrays."""
    return a[:, 0] * b[:, 0] - a[:, 1] * b[:, 1] - a[:, 2] * b[:, 2] - a[:, 3] * b[:, 3]


def colour_matrix(orderings: np.ndarray) -> np.ndarray:
    """C_sigma,tau = N^loops for orderings (K, m) of the gluons 0..m-1 before the fixed last one:
    the number of closed index loops when Tr(T_sigma T_last) is contracted with the conjugate of
    Tr(T_tau T_last) over every gluon's adjoint index with sum_a T^a_ij T^a_kl = delta_il delta_kj."""
    k, m = orderings.shape
    n = m + 1
    full = np.concatenate([orderings, np.full((k, 1), m)], axis=1)  # (K, n): gluon at each position
    pos = np.empty_like(full)
    pos[np.arange(k)[:, None], full] = np.arange(n)[None, :]  # position of each gluon in each trace
    out = np.empty((k, k))
    for s in range(k):
        # index i_j of trace sigma meets index j_pi(j) of trace tau (pi: the gluon's position in tau),
        # which meets i_f(j) with f(j) = pos_sigma(tau[pi(j) - 1]) + 1; the loops are f's cycles
        pi = pos[:, full[s]]  # (K, n): position in tau of the gluon at position j of sigma
        prev = full[np.arange(k)[:, None], (pi - 1) % n]  # gluon before it in tau
        f = (pos[s][prev] + 1) % n  # (K, n)
        # count the cycles of f for every tau at once
        seen = np.zeros((k, n), bool)
        loops = np.zeros(k, np.int64)
        for start in range(n):
            fresh = ~seen[:, start]
            loops += fresh
            cur = np.full(k, start)
            for _ in range(n):
                seen[np.arange(k), cur] |= fresh
                cur = f[np.arange(k), cur]
        out[s] = float(N_COLOURS) ** loops
    return out


class GluonOrdered:
    """Colour-ordered n-gluon amplitudes and their exact colour sum (see the module docstring)."""

    def __init__(self, n: int, orderings: list[tuple[int, ...]] | None = None):
        """`orderings`: the orderings of gluons 0..n-2 before the fixed last one whose amplitudes
        are computed (default: all (n-1)!, the trace basis, with its colour matrix; see `reduced`)."""
        self.n = n
        m = n - 1
        self.m = m
        full = list(itertools.permutations(range(m))) if orderings is None else [tuple(o) for o in orderings]
        # the contiguous sub-sequences of those orderings, by length, and each one's index in its level
        needed = [set() for _ in range(m + 1)]
        for o in full:
            for a in range(m):
                for b in range(a + 1, m + 1):
                    needed[b - a].add(o[a:b])
        self.levels: list[list[tuple[int, ...]]] = [[]] + [sorted(needed[k]) for k in range(1, m)] + [full]
        index = [{s: i for i, s in enumerate(level)} for level in self.levels]
        # joins of each level k >= 2: for V3 the split point, for V4 two split points (index arrays)
        self.v3: dict[int, list] = {}
        self.v4: dict[int, list] = {}
        #: per level k >= 2: the first gluon of each sequence and the index of the rest in level k - 1
        self.first: dict[int, np.ndarray] = {}
        self.rest: dict[int, np.ndarray] = {}
        for k in range(2, m + 1):
            level = self.levels[k]
            self.first[k] = np.array([s[0] for s in level])
            self.rest[k] = np.array([index[k - 1][s[1:]] for s in level])
            splits = [(i,) for i in range(1, k)]
            self.v3[k] = [(np.array([index[i][s[:i]] for s in level]), np.array([index[k - i][s[i:]] for s in level]),
                           i) for (i,) in splits]
            self.v4[k] = [(np.array([index[i][s[:i]] for s in level]), np.array([index[j - i][s[i:j]] for s in level]),
                           np.array([index[k - j][s[j:]] for s in level]), i, j)
                          for i in range(1, k - 1) for j in range(i + 1, k)]
        self.orderings = np.array(self.levels[m])
        self.colour = colour_matrix(self.orderings) if orderings is None else None
        #: the trace-basis orderings (the leading-colour flows) and the integer matrix that gives
        #: their amplitudes from this object's (None: they are this object's)
        self.trace_orderings = self.orderings
        self.to_trace: np.ndarray | None = None

    @classmethod
    def reduced(cls, n: int, samples: list[tuple[list[np.ndarray], list[np.ndarray]]]) -> "GluonOrdered":
        """The (n-2)! orderings with gluon 0 first and n-1 last (the basis of Del Duca, Dixon &
        Maltoni, Nucl. Phys. B571 (2000) 51), with the colour matrix K^T C K of the trace basis, K
        the integer matrix that gives every trace-basis amplitude from them (the Kleiss-Kuijf
        relations), solved from amplitudes at the sample points (external states, momenta) and
        checked to be integer; None where it is not."""
        trace = cls(n)
        if n < 4:
            return trace
        ddm = cls(n, [(0,) + rest for rest in itertools.permutations(range(1, n - 1))])
        a_full = np.concatenate([trace.amplitudes(e, m) for e, m in samples], axis=1)
        a_red = np.concatenate([ddm.amplitudes(e, m) for e, m in samples], axis=1)
        k, *_ = np.linalg.lstsq(a_red.T, a_full.T, rcond=None)
        k = k.T  # (trace orderings, reduced orderings)
        exact = np.round(k.real)
        scale = np.abs(a_full).max()
        if np.abs(k - exact).max() > 1e-6 or np.abs(exact @ a_red - a_full).max() > 1e-9 * scale:
            return trace
        ddm.colour = exact.T @ trace.colour @ exact
        ddm.trace_orderings, ddm.to_trace = trace.orderings, exact
        return ddm

    def trace_amplitudes(self, amps: np.ndarray) -> np.ndarray:
        """The trace-basis amplitudes (one per `trace_orderings`) from this object's (K, N)."""
        return amps if self.to_trace is None else self.to_trace @ amps

    def amplitudes(self, eps: list[np.ndarray], moms: list[np.ndarray]) -> np.ndarray:
        """Colour-ordered amplitudes (K, N) at unit coupling for external currents eps (one (4, N)
        per gluon, incoming convention) and incoming momenta moms, one per ordering of
        `self.orderings`, up to a phase common to all."""
        m = self.m
        cur = [None, np.stack(eps[:m])]  # level 1: (m, 4, N)
        mom = [None, np.stack(moms[:m])]
        last = eps[m][None]  # (1, 4, N)
        for k in range(2, m + 1):
            if k == m:  # the last level contracted with the last gluon at once: scalars only
                return self._closed(cur, mom, last)
            p = mom[1][self.first[k]] + mom[k - 1][self.rest[k]]  # the sequence's momentum
            total = None
            for left, right, i in self.v3[k]:
                j1, j2 = cur[i][left], cur[k - i][right]
                pp, qq = mom[i][left], mom[k - i][right]
                term = (_dot(j1, j2)[:, None] * (pp - qq) + 2.0 * _dot(qq, j1)[:, None] * j2
                        - 2.0 * _dot(pp, j2)[:, None] * j1) * (1j / math.sqrt(2.0))
                total = term if total is None else total + term
            for a, b, c, i, j in self.v4[k]:
                j1, j2, j3 = cur[i][a], cur[j - i][b], cur[k - j][c]
                term = (2.0 * _dot(j1, j3)[:, None] * j2 - _dot(j2, j3)[:, None] * j1
                        - _dot(j1, j2)[:, None] * j3) * 0.5j
                total = total + term
            mom.append(p)
            cur.append(total * (-1j / _dot(p, p))[:, None])
        return _dot(cur[1], np.broadcast_to(last, cur[1].shape))  # m = 1

    def _closed(self, cur, mom, last):
        """eps_last . (sum of the joins) of the full-length sequences, (K, N)."""
        m = self.m
        total = None
        for left, right, i in self.v3[m]:
            j1, j2 = cur[i][left], cur[m - i][right]
            pp, qq = mom[i][left], mom[m - i][right]
            e1, e2 = _dot(j1, last), _dot(j2, last)
            term = (_dot(j1, j2) * _dot(pp - qq, last) + 2.0 * _dot(qq, j1) * e2 - 2.0 * _dot(pp, j2) * e1) \
                * (1j / math.sqrt(2.0))
            total = term if total is None else total + term
        for a, b, c, i, j in self.v4[m]:
            j1, j2, j3 = cur[i][a], cur[j - i][b], cur[m - j][c]
            term = (2.0 * _dot(j1, j3) * _dot(j2, last) - _dot(j2, j3) * _dot(j1, last)
                    - _dot(j1, j2) * _dot(j3, last)) * 0.5j
            total = total + term
        return total

    def colour_summed(self, amps: np.ndarray) -> np.ndarray:
        """sum_{sigma, tau} A_sigma^* C A_tau per point, from amplitudes (K, N)."""
        return (np.conj(amps) * (self.colour @ amps)).real.sum(axis=0)
