"""Tree amplitudes by off-shell recursion (Berends & Giele, Nucl. Phys. B306 (1988) 759), for any
model file: currents over subsets of the external legs, vectorized over phase-space points.

Every leg is treated as incoming: an outgoing particle is the incoming antiparticle with its
momentum reversed, and its external state is the conjugate one (u-bar, v, eps*). A current of a
subset S of legs is the sum of all tree diagrams joining the legs of S and one off-shell line,
with the propagator of that line; its label is the particle it is as an incoming leg of the rest
of the diagram. Currents of two or more smaller subsets (one fewer than the vertex has legs) are
joined at every vertex of the model that takes their labels; the amplitude joins the current of
all legs but the last with the last leg's external state.

Currents (component-major, points last):

- ``col``: a Dirac column (4, N), the line of an incoming fermion or an outgoing antifermion;
- ``row``: a Dirac row (4, N), the line of an outgoing fermion or an incoming antifermion;
- ``vec``: a vector J^mu (4, N), upper index; ``sca``: a scalar (1, N).

Colour rides along as extra axes between the Lorentz axis and the points: none for singlets, a
triplet (D,) for quark lines, a D x D matrix G = G^a t^a for gluons (Tr t^a t^b = delta/2), so that
f^abc X^a Y^b t^c = -i [X, Y] and the quark-gluon vertex is a matrix product (Peskin & Schroeder
(1995), eq. (16.10) and appendix A, in the convention of the model file). With D = 3 and the
Fierz term -delta/(2N) of the gluon the colour is exact SU(3); the leading-colour mode (D = the
number of colour lines, no Fierz term, every line a label of its own) gives the colour-flow
amplitudes from which an event's colour flow is drawn (Maltoni, Paul, Stelzer & Willenbrock,
Phys. Rev. D 67 (2003) 014026).

Fermion signs: each diagram carries the parity of the order in which its external fermions are
met along its lines (the open end first, then each closed line as its row end and its column
end), against their order as legs; joining two currents multiplies by the parity of interleaving
their sorted fermion legs, the fermion-type (the row one, when a row and a column close a line)
taken first. The sign of the whole amplitude is common to all diagrams and drops out of |M|^2.
"""

from __future__ import annotations

import itertools
from collections import defaultdict
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from ..particles import antiparticle, species
from . import external
from .model import NumericVertex

__all__ = ["Leg", "Recursion", "kind_of", "mdot"]

METRIC = np.array([1.0, -1.0, -1.0, -1.0])


def kind_of(name: str) -> str:
    sp = species(name)
    if sp.spin2 == 1:
        return "col" if sp.pdg > 0 else "row"
    return "vec" if sp.spin2 == 2 else "sca"


def mdot(a, b):
    """Minkowski product over the first axis (any colour axes and points after it broadcast)."""
    return a[0] * b[0] - a[1] * b[1] - a[2] * b[2] - a[3] * b[3]


def _lower(v):
    """v_mu: the metric applied to the first axis."""
    return v * METRIC.reshape((4,) + (1,) * (v.ndim - 1))


def _sigma_dot(v):
    """The 2x2 blocks (v.sigma, v.sigmabar) of a four-vector v (4, ...) as (2, 2, ...) arrays,
    v.sigma = v^0 - v.vec(sigma), v.sigmabar = v^0 + v.vec(sigma)."""
    v0, v1, v2, v3 = v[0], v[1], v[2], v[3]
    s = np.empty((2, 2) + np.shape(v0), complex)
    sb = np.empty_like(s)
    np.subtract(v0, v3, out=s[0, 0])
    np.add(v0, v3, out=s[1, 1])
    np.subtract(v1, 1j * v2, out=sb[0, 1])
    np.add(v1, 1j * v2, out=sb[1, 0])
    sb[0, 0], sb[1, 1] = s[1, 1], s[0, 0]
    np.negative(sb[0, 1], out=s[0, 1])
    np.negative(sb[1, 0], out=s[1, 0])
    return s, sb


def _mat_col(m, x):
    """(m x)_i = m_ij x_j for 2x2 blocks m (2, 2, ...) and two-spinors x (2, ...)."""
    return np.stack([m[0, 0] * x[0] + m[0, 1] * x[1], m[1, 0] * x[0] + m[1, 1] * x[1]])


def _row_mat(x, m):
    """(x m)_j = x_i m_ij."""
    return np.stack([x[0] * m[0, 0] + x[1] * m[1, 0], x[0] * m[0, 1] + x[1] * m[1, 1]])


def _slash_col(p, psi):
    """pslash psi for a column (4, ...) and p (4, ...)."""
    s, sb = _sigma_dot(p)
    return np.concatenate([_mat_col(s, psi[2:]), _mat_col(sb, psi[:2])])


def _row_slash(chi, p):
    """chibar pslash for a row (4, ...)."""
    s, sb = _sigma_dot(p)
    return np.concatenate([_row_mat(chi[2:], sb), _row_mat(chi[:2], s)])


@dataclass(frozen=True)
class Leg:
    """An external particle: its name, whether incoming, its mass (GeV) and its helicities."""

    name: str
    incoming: bool
    mass: float

    @property
    def label(self) -> str:
        """The leg as an incoming particle."""
        return self.name if self.incoming else antiparticle(self.name)

    @property
    def kind(self) -> str:
        return kind_of(self.label)

    @property
    def helicities(self) -> tuple[int, ...]:
        s2 = species(self.name).spin2
        if s2 == 0:
            return (0,)
        if s2 == 2:
            return (-1, 0, 1) if self.mass > 0 else (-1, 1)
        return (-1, 1)

    @property
    def colour(self) -> int:
        """The colour representation of the leg as incoming: 1, 3 (a column), -3 (a row) or 8."""
        return species(self.label).colour


# --- colour helpers ------------------------------------------------------------------------------

def _mm(a, b):
    """Matrix product over the colour axes of gluon values (..., D, D, N) -- the two axes before N --
    broadcasting over the leading axes."""
    d = a.shape[-2]
    out = a[..., :, 0:1, :] * b[..., 0:1, :, :]
    for j in range(1, d):
        out = out + a[..., :, j:j + 1, :] * b[..., j:j + 1, :, :]
    return out


def _contract(x, z):
    """sum_mu g_mu x^mu z^mu as a colour-matrix product (Lorentz axis first)."""
    return (_mm(x, z) * METRIC.reshape((4,) + (1,) * (x.ndim - 1))).sum(axis=0)


def _sandwich(x, y, z):
    """[sigma] sum_mu g_mu x^mu y^sigma z^mu."""
    xy = _mm(x[:, None], y[None, :])  # (mu, sigma, ...)
    t = _mm(xy, z[:, None])
    return (t * METRIC.reshape((4,) + (1,) * (t.ndim - 1))).sum(axis=0)


def _comm(a, b):
    return _mm(a, b) - _mm(b, a)


# --- the recursion -------------------------------------------------------------------------------

@dataclass(frozen=True)
class _Join:
    parts: tuple[int, ...]  # subset masks of the inputs, in the vertex's slot order (output slot left out)
    labels: tuple[str, ...]
    vertex: NumericVertex
    slots: tuple[int, ...]  # vertex slot of each input
    out_slot: int
    sign: int


def _split(mask: int, k: int):
    """The partitions of a mask into exactly k non-empty parts, the first holding its lowest bit."""
    if k == 1:
        yield (mask,)
        return
    low = mask & -mask
    rest = mask ^ low
    sub = rest
    while True:
        a = low | sub
        b = mask ^ a
        if bin(b).count("1") >= k - 1:
            for tail in _split(b, k - 1):
                yield (a,) + tail
        if sub == 0:
            break
        sub = (sub - 1) & rest


def _fermion_legs(mask: int, fermions: frozenset[int]) -> list[int]:
    return [i for i in range(mask.bit_length()) if mask >> i & 1 and i in fermions]


def _interleave_sign(first: Sequence[int], second: Sequence[int]) -> int:
    """Parity of sorting the concatenation first + second (each sorted)."""
    inv = sum(1 for i in first for j in second if i > j)
    return -1 if inv % 2 else 1


class Recursion:
    """The amplitudes of one process (legs in a fixed order) in one model.

    `vertices` are the model's numeric vertices; `masses` and `widths` map particle names to GeV
    (for propagators); `complex_mass` puts m^2 - i m Gamma into every propagator, else a width
    enters only where the line's p^2 > 0. `dim` and `leading` choose exact SU(3) colour (3,
    False) or colour-flow amplitudes (the number of colour lines, True).
    """

    def __init__(self, legs: Sequence[Leg], vertices: Sequence[NumericVertex], masses: Mapping[str, float],
                 widths: Mapping[str, float], complex_mass: bool = False, dim: int = 3, leading: bool = False,
                 resonances: Sequence[tuple[int, str]] = ()):
        self.legs = tuple(legs)
        self.n = len(self.legs)
        self.resonances = tuple(resonances)
        self._cuts = [self._cut_of(mask, label) for mask, label in self.resonances]
        self.dim, self.leading, self.complex_mass = dim, leading, complex_mass
        self.masses = dict(masses)
        self.widths = dict(widths)
        self.fermions = frozenset(i for i, leg in enumerate(self.legs) if leg.kind in ("col", "row"))
        #: per-point factors (N,) on the couplings of some vertices, by id of the vertex: a running
        #: coupling (see `TreeAmplitude.squared`); empty when every coupling is a number
        self.vertex_scale: dict[int, np.ndarray] = {}
        # vertices by the multiset of labels of their input legs
        self._by_inputs: dict[tuple[str, ...], list[tuple[NumericVertex, tuple[int, ...], int]]] = defaultdict(list)
        #: the most currents a vertex joins (its legs less the one it makes)
        self._most = max((len(v.legs) - 1 for v in vertices), default=2)
        for v in vertices:
            k = len(v.legs)
            seen = set()
            for out in range(k):
                out_label = antiparticle(v.legs[out])
                ins = tuple(s for s in range(k) if s != out)
                key = tuple(sorted(v.legs[s] for s in ins))
                if (key, out_label) in seen:
                    continue  # the vertex is symmetric in identical legs: one arrangement
                seen.add((key, out_label))
                self._by_inputs[key].append((v, ins, out))
        self._plan()

    # --- structure -------------------------------------------------------------------------------
    def _plan(self) -> None:
        """Which currents exist for each subset of legs 0..n-2, and the joins that make them; then
        only those the amplitude needs are kept."""
        last = self.n - 1
        full = (1 << last) - 1
        labels: dict[int, set[str]] = {1 << i: {self.legs[i].label} for i in range(last)}
        joins: dict[tuple[int, str], list[_Join]] = defaultdict(list)
        by_size = sorted(range(1, full + 1), key=lambda m: bin(m).count("1"))
        for mask in by_size:
            if bin(mask).count("1") < 2:
                continue
            found = set()
            for parts in self._partitions(mask, self._most):
                for combo in itertools.product(*(sorted(labels.get(p, ())) for p in parts)):
                    key = tuple(sorted(combo))
                    for v, ins, out in self._by_inputs.get(key, ()):
                        # assign the parts to the input slots by label
                        slots = self._assign(v, ins, combo)
                        out_label = antiparticle(v.legs[out])
                        if self._cuts and not self._resonant(mask, out_label, parts):
                            continue
                        sign = self._sign(parts, combo)
                        joins[(mask, out_label)].append(_Join(parts, combo, v, slots, out, sign))
                        found.add(out_label)
            if found:
                labels[mask] = found
        # keep what the amplitude needs, from the top down
        target = antiparticle(self.legs[last].label)
        need = {(full, target)} if target in labels.get(full, ()) else set()
        stack = list(need)
        while stack:
            key = stack.pop()
            for j in joins.get(key, ()):
                for p, lab in zip(j.parts, j.labels):
                    if bin(p).count("1") > 1 and (p, lab) not in need:
                        need.add((p, lab))
                        stack.append((p, lab))
        self.joins = {k: v for k, v in joins.items() if k in need}
        self.order = sorted(self.joins, key=lambda k: bin(k[0]).count("1"))
        self.full, self.target = full, target
        self.exists = bool(need)

    def _cut_of(self, mask: int, label: str) -> tuple[int, str]:
        """A resonance (the legs its decay makes, as a mask over all legs; the decaying particle as
        it comes out) as the current that must carry it: over those legs with the particle's
        antiparticle as label (the line enters the rest of the diagram as such), or, when they
        include the last leg, over all the other legs with the particle itself."""
        last = 1 << (self.n - 1)
        if mask & last:
            return ((1 << self.n) - 1) ^ mask, label
        return mask, antiparticle(label)

    def _resonant(self, mask: int, label: str, parts) -> bool:
        """Whether a join of `parts` into the current (mask, label) belongs to a diagram in which every
        resonance is one line: its legs on one side of it and nothing else. The current's legs then
        lie inside a resonance's, outside them, or around them with one part holding them all."""
        for r, lab in self._cuts:
            common = mask & r
            if common == 0 or common == mask and mask != r:
                continue
            if mask == r:
                if label != lab:
                    return False
                continue
            if common != r or not any(p & r == r for p in parts):
                return False
        return True

    @staticmethod
    def _partitions(mask: int, most: int = 3):
        """Unordered partitions of a mask into two to `most` non-empty parts (each once: a part
        holds the lowest leg of what is left)."""
        for k in range(2, most + 1):
            yield from _split(mask, k)

    @staticmethod
    def _assign(v: NumericVertex, ins: tuple[int, ...], combo: tuple[str, ...]) -> tuple[int, ...]:
        free = list(ins)
        slots = []
        for lab in combo:
            for s in free:
                if v.legs[s] == lab:
                    slots.append(s)
                    free.remove(s)
                    break
        return tuple(slots)

    def _sign(self, parts, combo) -> int:
        """The interleaving parity of a join (see the module docstring)."""
        if len(parts) == 2:
            fa, fb = (_fermion_legs(p, self.fermions) for p in parts)
            ka, kb = (kind_of(c) for c in combo)
            # the fermion-type current first; a row before a column when the two close a line
            if (ka in ("col", "row")) and (kb in ("col", "row")):
                first, second = (fa, fb) if ka == "row" else (fb, fa)
            elif kb in ("col", "row"):
                first, second = fb, fa
            else:
                first, second = fa, fb
            return _interleave_sign(first, second)
        fs = [_fermion_legs(p, self.fermions) for p in parts]
        if any(len(f) % 2 for f in fs):
            raise ValueError("vertices of four or more legs with fermions are not supported")
        sign, acc = 1, fs[0]
        for f in fs[1:]:
            sign *= _interleave_sign(acc, f)
            acc = sorted(acc + f)
        return sign

    # --- external states -------------------------------------------------------------------------
    def external(self, i: int, p, hel: int, colour) -> np.ndarray:
        """The current of leg i: physical momentum p (4, N), helicity, colour state (see `colour_state`)."""
        leg = self.legs[i]
        sp = species(leg.name)
        if sp.spin2 == 1:
            if sp.pdg > 0:
                s = external.u_spinor(p, leg.mass, hel)
                spin = s if leg.incoming else external.bar(s)
            else:
                s = external.v_spinor(p, leg.mass, hel)
                spin = external.bar(s) if leg.incoming else s
        elif sp.spin2 == 2:
            e = external.polarization(p, leg.mass, hel)
            spin = e if leg.incoming else np.conj(e)
        else:
            spin = np.ones((1, p.shape[1]), complex)
        return self.dress(spin, leg.colour, colour)

    def dress(self, spin, rep: int, colour) -> np.ndarray:
        """A spin part (L, N) times a colour state: None for singlets; an index (or an (N,) array of
        indices) for quarks; a pair (i, j) of indices (or arrays) for gluons."""
        if rep == 1:
            return spin
        d, n = self.dim, spin.shape[1]
        pts = np.arange(n)
        if abs(rep) == 3:
            c = np.zeros((d, n))
            c[np.broadcast_to(colour, (n,)), pts] = 1.0
            return spin[:, None, :] * c[None]
        i, j = (np.broadcast_to(x, (n,)) for x in colour)
        c = np.zeros((d, d, n))
        c[i, j, pts] = 1.0 / np.sqrt(2.0)
        if not self.leading:
            diag = i == j
            for k in range(d):
                c[k, k] -= np.where(diag, 1.0 / (d * np.sqrt(2.0)), 0.0)
        return spin[:, None, None, :] * c[None]

    # --- propagators -----------------------------------------------------------------------------
    def _den(self, label: str, p2):
        m = self.masses.get(label, 0.0)
        w = self.widths.get(label, 0.0)
        if m == 0.0:
            return p2 + 0j, 0.0
        if self.complex_mass:
            mu2 = m * m - 1j * m * w
            return p2 - mu2, mu2
        width = np.where(p2 > 0.0, m * w, 0.0) if w > 0.0 else 0.0
        return p2 - m * m + 1j * width, m * m

    def propagate(self, label: str, value, p, p2):
        """The propagator of a line with momentum p (4, N) (flowing into the rest) applied to a current."""
        kind = kind_of(label)
        den, mu2 = self._den(label, p2)
        extra = value.ndim - 2
        pb = p.reshape((4,) + (1,) * extra + (p.shape[1],)) if extra else p
        if kind == "vec":
            if mu2 != 0.0:
                pj = mdot(pb, value)
                value = value - pb * (pj / mu2)[None]
            return (-1j / den) * value
        if kind == "sca":
            return (1j / den) * value
        m = self.masses.get(label, 0.0)
        if self.complex_mass and m:
            m = np.sqrt(mu2)
        if kind == "col":
            out = _slash_col(pb, value) + m * value
        else:
            out = -_row_slash(value, pb) + m * value
        return (1j / den) * out

    # --- vertices --------------------------------------------------------------------------------
    def _vertex(self, j: _Join, inputs, moms):
        """The vertex factor of a join applied to its inputs (values in slot order), no propagator."""
        v = j.vertex
        form, c = v.form, v.couplings
        by_slot = dict(zip(j.slots, inputs))
        mom = dict(zip(j.slots, moms))
        o = j.out_slot
        if form == "fermion-vector":
            left, right = c
            if o == 2:
                return self._ffv_current(by_slot[0], by_slot[1], left, right, v.colour)
            vec = by_slot[2]
            if o == 0:  # column in, column out
                return self._ffv_col(by_slot[1], vec, left, right, v.colour)
            return self._ffv_row(by_slot[0], vec, left, right, v.colour)
        if form == "fermion-scalar":
            left, right = c
            if o == 2:
                row, col = by_slot[0], by_slot[1]
                n = row.shape[-1]
                prod_l = (row[:2] * col[:2]).reshape(-1, n).sum(axis=0)
                prod_r = (row[2:] * col[2:]).reshape(-1, n).sum(axis=0)
                return 1j * (left * prod_l + right * prod_r)[None]
            s = by_slot[2][0]
            if o == 0:
                col = by_slot[1]
                return 1j * np.concatenate([left * col[:2] * s, right * col[2:] * s])
            row = by_slot[0]
            return 1j * np.concatenate([left * row[:2] * s, right * row[2:] * s])
        if form == "vector-cubic":
            a, b = (o + 1) % 3, (o + 2) % 3
            x, y = by_slot[a], by_slot[b]
            ka, kb = mom[a], mom[b]
            kc = -(ka + kb)
            return self._vvv(x, y, ka, kb, kc, c[0], v.colour)
        if form == "vector-quartic":
            return self._vvvv(by_slot, o, c[0], v.colour)
        if form == "vector-vector-scalar":
            if o == 2:
                return 1j * c[0] * mdot(by_slot[0], by_slot[1])[None]
            vec, s = by_slot[1 - o], by_slot[2][0]
            return 1j * c[0] * vec * s
        if form == "vector-vector-scalar-scalar":
            if o >= 2:
                return 1j * c[0] * (mdot(by_slot[0], by_slot[1]) * by_slot[5 - o][0])[None]
            vec = by_slot[1 - o]
            return 1j * c[0] * vec * by_slot[2][0] * by_slot[3][0]
        if form == "strength-pair-scalar":
            return self._strength_pair(by_slot, mom, o, c[0], v.colour)
        if form == "vector-cubic-scalar":
            if o == 3:  # the scalar made: the cubic current of slots 0, 1 closed with slot 2
                j3 = self._vvv(by_slot[0], by_slot[1], mom[0], mom[1], mom[2], c[0], v.colour)
                return _close_vectors(j3, by_slot[2], v.colour)[None]
            a, b = (o + 1) % 3, (o + 2) % 3
            ka, kb = mom[a], mom[b]
            return self._vvv(by_slot[a], by_slot[b], ka, kb, -(ka + kb + mom[3]), c[0], v.colour) * by_slot[3][0]
        if form == "vector-quartic-scalar":
            if o == 4:
                return _close_vectors(self._vvvv(by_slot, 3, c[0], v.colour), by_slot[3], v.colour)[None]
            return self._vvvv(by_slot, o, c[0], v.colour) * by_slot[4][0]
        if form in ("scalar-cubic", "scalar-quartic"):
            prod = 1j * c[0]
            for val in inputs:
                prod = prod * val[0]
            return prod[None]
        raise ValueError(f"form {form!r} is not implemented")

    def _ffv_current(self, row, col, left, right, colour):
        """J^mu = row i gamma^mu (left P_L + right P_R) col, colour contracted or a gluon matrix."""
        ra, rb, ca, cb = row[:2], row[2:], col[:2], col[2:]
        # L chibar_b sigmabar^mu psi_a + R chibar_a sigma^mu psi_b, component by component
        def bil(x, y, bar_):
            s = -1.0 if bar_ else 1.0  # sigmabar = (1, -sigma) against sigma = (1, sigma)
            x0, x1 = x[0], x[1]
            y0, y1 = y[0], y[1]
            if colour == "fundamental":
                def outer(u, w):
                    return u[None, :, :] * w[:, None, :]  # (D, D, N): (col index k, row index l) -> w_k u_l
                t0 = outer(x0, y0) + outer(x1, y1)
                t1 = outer(x0, y1) + outer(x1, y0)
                t2 = -1j * outer(x0, y1) + 1j * outer(x1, y0)
                t3 = outer(x0, y0) - outer(x1, y1)
            else:
                red = (lambda z: z.sum(axis=0)) if x0.ndim == 2 else (lambda z: z)
                t0 = red(x0 * y0 + x1 * y1)
                t1 = red(x0 * y1 + x1 * y0)
                t2 = red(-1j * x0 * y1 + 1j * x1 * y0)
                t3 = red(x0 * y0 - x1 * y1)
            return np.stack([t0, s * t1, s * t2, s * t3])

        j = 1j * (left * bil(rb, ca, True) + right * bil(ra, cb, False))
        if colour == "fundamental":
            j = 0.5 * j
            if not self.leading:
                tr = np.einsum("mkkn->mn", j)
                eye = np.eye(self.dim)[None, :, :, None]
                j = j - eye * (tr / self.dim)[:, None, None, :]
        return j

    def _ffv_col(self, col, vec, left, right, colour):
        """i gamma^mu (left P_L + right P_R) col V_mu."""
        if colour == "fundamental":
            # G psi: the gluon matrix acting on the quark's colour, for each spinor and Lorentz component
            s, sb = _sigma_dot(vec)
            top = _block_col_colour(s, col[2:])
            bot = _block_col_colour(sb, col[:2])
            return 1j * np.concatenate([right * top, left * bot])
        v = vec if vec.ndim == col.ndim else vec[:, None, :]
        s, sb = _sigma_dot(v)
        return 1j * np.concatenate([right * _mat_col(s, col[2:]), left * _mat_col(sb, col[:2])])

    def _ffv_row(self, row, vec, left, right, colour):
        """row i gamma^mu (left P_L + right P_R) V_mu."""
        if colour == "fundamental":
            s, sb = _sigma_dot(vec)
            first = _block_row_colour(row[2:], sb)
            second = _block_row_colour(row[:2], s)
            return 1j * np.concatenate([left * first, right * second])
        v = vec if vec.ndim == row.ndim else vec[:, None, :]
        s, sb = _sigma_dot(v)
        return 1j * np.concatenate([left * _row_mat(row[2:], sb), right * _row_mat(row[:2], s)])

    def _vvv(self, x, y, ka, kb, kc, coupling, colour):
        """i c [g^{ab}(ka - kb)^c + g^{bc}(kb - kc)^a + g^{ca}(kc - ka)^b] with x at a, y at b, out at c."""
        d1, d2, d3 = ka - kb, kb - kc, kc - ka
        if colour == "adjoint":
            # f^{abc} x^a y^b t^c = -i [x, y]: i c (-i) {...} = c {...}
            xy = _contract(x, y) - _contract(y, x)  # sum_mu g [x^mu, y^mu]
            kx = sum(METRIC[m] * d2[m] * x[m] for m in range(4))
            ky = sum(METRIC[m] * d3[m] * y[m] for m in range(4))
            out = (xy[None] * d1[:, None, None, :] + _mm(kx[None], y) - _mm(y, kx[None])
                   + _mm(x, ky[None]) - _mm(ky[None], x))
            return coupling * out
        extra = x.ndim - 2
        bc = (lambda k: k.reshape((4,) + (1,) * extra + (k.shape[1],))) if extra else (lambda k: k)
        return 1j * coupling * (mdot(x, y)[None] * bc(d1) + y * mdot(bc(d2), x)[None] + x * mdot(bc(d3), y)[None])

    @staticmethod
    def _strength_pair(by_slot, mom, o, coupling, colour):
        """i c [(k1.k2) g^{12} - k2^1 k1^2] (the product of two field strengths, momenta incoming)
        times a scalar, colour delta^ab for two gluons ("pair") or none (two photons)."""
        if o == 2:
            x, y, k1, k2 = by_slot[0], by_slot[1], mom[0], mom[1]
            kx, ky = mdot(k2, x), mdot(k1, y)
            if colour == "pair":  # delta^ab X^a Y^b = 2 Tr(X Y)
                val = 2.0 * (np.einsum("mijn,mjin->n", _lower(x), y) * mdot(k1, k2) - np.einsum("ijn,jin->n", kx, ky))
            else:
                val = mdot(x, y) * mdot(k1, k2) - kx * ky
            return 1j * coupling * val[None]
        a = 1 - o
        x, ka = by_slot[a], mom[a]
        ko = -(ka + mom[2])
        extra = x.ndim - 2
        bc = ka.reshape((4,) + (1,) * extra + (ka.shape[1],)) if extra else ka
        return 1j * coupling * (mdot(ka, ko) * x - bc * mdot(ko, x)[None]) * by_slot[2][0]

    def _vvvv(self, by_slot, o, coupling, colour):
        ins = [s for s in range(4) if s != o]
        if colour == "adjoint":
            a, b, c = (by_slot[s] for s in ins)

            def sand(p, q, r):  # sum_mu g [[p^mu, q^sig], r^mu]
                return (_sandwich(p, q, r) - _mm(q, _contract(p, r)[None]) - _mm(_contract(r, p)[None], q)
                        + _sandwich(r, q, p))

            def free_first(p, q, r):  # sum_mu g [[p^sig, q^mu], r^mu]
                return (_mm(p, _contract(q, r)[None]) - _sandwich(q, p, r) - _sandwich(r, p, q)
                        + _mm(_contract(r, q)[None], p))

            def nest(p, q, r):  # sum_mu g [p^mu, [q^mu, r^sig]]
                return (_mm(_contract(p, q)[None], r) - _sandwich(p, r, q) - _sandwich(q, r, p)
                        + _mm(r, _contract(q, p)[None]))

            def nest_mid(p, q, r):  # sum_mu g [p^mu, [q^sig, r^mu]]
                return (_sandwich(p, q, r) - _mm(_contract(p, r)[None], q) - _mm(q, _contract(r, p)[None])
                        + _sandwich(r, q, p))

            t1 = -(sand(a, b, c) - free_first(a, b, c))
            t2 = -(sand(a, c, b) - free_first(a, c, b))
            t3 = nest(a, b, c) - nest_mid(a, b, c)
            return 1j * coupling * (t1 + t2 + t3)
        # 2 g^{13} g^{24} - g^{12} g^{34} - g^{14} g^{23} (slots 0..3)
        terms = (((0, 2), (1, 3), 2.0), ((0, 1), (2, 3), -1.0), ((0, 3), (1, 2), -1.0))
        out = 0.0
        for p1, p2, w in terms:
            free_pair, dot_pair = (p1, p2) if o in p1 else (p2, p1)
            partner = free_pair[0] if free_pair[1] == o else free_pair[1]
            out = out + w * by_slot[partner] * mdot(by_slot[dot_pair[0]], by_slot[dot_pair[1]])[None]
        return 1j * coupling * out

    # --- amplitudes ------------------------------------------------------------------------------
    def amplitude(self, externals: Sequence[np.ndarray], moms: Sequence[np.ndarray], cache: dict | None = None,
                  key=None) -> np.ndarray:
        """The amplitude (N,) for external currents (one per leg) and leg momenta (4, N) flowing in
        (p for an incoming leg, -p for an outgoing one). `cache` with `key(mask)` shares currents
        of subsets between calls whose legs in the subset are in the same states."""
        cache = {} if cache is None else cache
        key = key or (lambda mask: None)
        cur: dict[tuple[int, str], np.ndarray] = {}
        mom: dict[int, np.ndarray] = {}
        p2s: dict[int, np.ndarray] = {}
        for i in range(self.n - 1):
            cur[(1 << i, self.legs[i].label)] = externals[i]
            mom[1 << i] = moms[i]

        def momentum(mask):
            if mask not in mom:
                mom[mask] = sum(moms[i] for i in range(self.n - 1) if mask >> i & 1)
            return mom[mask]

        result = None
        for mask, label in self.order:
            ck = (mask, label, key(mask))
            if ck[2] is not None and ck in cache and mask != self.full:
                cur[(mask, label)] = cache[ck]
                continue
            total = None
            for j in self.joins[(mask, label)]:
                vals = [cur.get((p, lab)) for p, lab in zip(j.parts, j.labels)]
                if any(v is None for v in vals):
                    continue
                term = self._vertex(j, vals, [momentum(p) for p in j.parts])
                if self.vertex_scale:
                    f = self.vertex_scale.get(id(j.vertex))
                    if f is not None:
                        term = term * f
                term = term if j.sign > 0 else -term
                total = term if total is None else total + term
            if total is None:
                continue
            if mask == self.full:
                result = total
                break
            p = momentum(mask)
            if mask not in p2s:
                p2s[mask] = mdot(p, p)
            val = self.propagate(label, total, p, p2s[mask])
            cur[(mask, label)] = val
            if ck[2] is not None:
                cache[ck] = val
        n_pts = moms[0].shape[1]
        if result is None:
            return np.zeros(n_pts, complex)
        return self._close(result, externals[self.n - 1])

    def _close(self, j, ext):
        """The amputated current of legs 0..n-2 joined with the last leg's state, with the sign of the join."""
        last = self.legs[-1]
        sign = self._sign((self.full, 1 << (self.n - 1)), (self.target, last.label))
        n = ext.shape[-1]
        if last.kind == "vec" and last.colour == 8:  # 2 Tr(J_mu E^mu): J = J^a t^a, E = E^a t^a
            total = 2.0 * np.einsum("mijn,mjin->n", _lower(j), ext)
        elif last.kind == "vec":
            total = (_lower(j) * ext).reshape(-1, n).sum(axis=0)
        else:
            total = (j * ext).reshape(-1, n).sum(axis=0)
        return sign * total


def _close_vectors(j, z, colour):
    """sum_mu j_mu z^mu (N,) of two vector currents, the colour traced for gluons (2 Tr(J Z))."""
    if colour in ("adjoint", "pair"):
        return 2.0 * np.einsum("mijn,mjin->n", _lower(j), z)
    return (_lower(j) * z).sum(axis=0)


def _block_col_colour(m, col):
    """Spin block m (2, 2, [D, D,] N) of V.sigma with a gluon matrix per entry, applied to a coloured
    two-spinor col (2, D, N): out_{a,k} = sum_b sum_l m_ab,kl col_b,l."""
    return np.einsum("abkln,bln->akn", m, col)


def _block_row_colour(row, m):
    """out_{b,l} = sum_a sum_k row_a,k m_ab,kl."""
    return np.einsum("akn,abkln->bln", row, m)
