"""Parton densities: sets in the community's standard grid format, cubic interpolation, alpha_s.

A set is a folder NAME holding NAME.info (YAML metadata) and one NAME_NNNN.dat file per member in
the `lhagrid1` block format: blocks separated by `---`, each with a line of x nodes, a line of Q
nodes (GeV), a line of PDG ids (21 for the gluon) and then, x outer and Q inner, one line of
x f(x, Q) per (x, Q) node. Sets are found in a folder given explicitly, in the folders of the
search-path environment variable LHAPDF_DATA_PATH, or among the sets shipped with gen.

Interpolation is cubic (four-point Lagrange) in log x and in log Q^2 within each block, with the
blocks split at the flavour thresholds. Outside the grid: x and Q are clamped to the grid's edges
(the edge value is returned; no extrapolation), and x f(x, Q) = 0 for x >= 1. All evaluation is
vectorized over points.

The default set, `genbench-lo`, is the Les Houches benchmark input (hep-ph/0204316, eq. 31)
evolved at leading order in the variable-flavour scheme with hoppet (see `make_benchmark_set`):
a benchmark for numerical checks, not a fit to data.
"""

from __future__ import annotations

import gzip
import math
import os
import re
import zlib
from dataclasses import dataclass
from functools import cached_property, lru_cache
from importlib import resources
from pathlib import Path

import numpy as np

from ..errors import UserError

__all__ = ["PdfError", "PdfSet", "Block", "SetHeader", "find_set", "read_header", "load", "parse_info", "AlphaS",
           "DEFAULT_SET", "SEARCH_PATH_VARIABLE", "make_benchmark_set"]

DEFAULT_SET = "genbench-lo"
SEARCH_PATH_VARIABLE = "LHAPDF_DATA_PATH"


class PdfError(UserError):
    """A parton-density set that is missing, incomplete or malformed."""


# --- metadata ---------------------------------------------------------------------------------

def _scalar(text: str):
    t = text.strip()
    if len(t) >= 2 and t[0] == t[-1] and t[0] in "\"'":
        return t[1:-1]
    try:
        return int(t)
    except ValueError:
        pass
    try:
        return float(t.replace("D", "E").replace("d", "e")) if re.fullmatch(r"[-+0-9.eEdD]+", t) else t
    except ValueError:
        return t


def parse_info(text: str, source: str = "<info>") -> dict:
    """The flat YAML of a set's .info file: `key: value` lines, values scalars or [lists] (may span lines)."""
    out: dict = {}
    lines = text.splitlines()
    i = 0
    while i < len(lines):
        raw = lines[i].split("#", 1)[0].rstrip() if not lines[i].lstrip().startswith(("SetDesc", "Reference")) else lines[i]
        i += 1
        if not raw.strip():
            continue
        if ":" not in raw:
            raise PdfError(f"{source}:{i}: expected 'key: value', found {raw.strip()!r}")
        key, value = raw.split(":", 1)
        value = value.strip()
        if value.startswith("["):
            while "]" not in value and i < len(lines):
                value += " " + lines[i].split("#", 1)[0].strip()
                i += 1
            if "]" not in value:
                raise PdfError(f"{source}: unterminated list for {key.strip()}")
            inner = value[1:value.index("]")]
            out[key.strip()] = [_scalar(v) for v in inner.split(",") if v.strip()]
        else:
            out[key.strip()] = _scalar(value)
    return out


# --- grids and interpolation ------------------------------------------------------------------

@dataclass(frozen=True)
class Block:
    """One Q range of a member: nodes and x f(x, Q) values of shape (nx, nq, n_flavours)."""

    x: np.ndarray
    q: np.ndarray
    pids: tuple[int, ...]
    values: np.ndarray

    @cached_property
    def logx(self) -> np.ndarray:
        return np.log(self.x)

    @cached_property
    def logq2(self) -> np.ndarray:
        return np.log(self.q * self.q)


def _lagrange4(nodes: np.ndarray, t: np.ndarray):
    """Indices (N, 4) of a four-node stencil around t and its Lagrange weights (N, 4); fewer nodes
    than four fall back to lower order. w_a = prod_(b != a) (t - x_b) / (x_a - x_b), with the
    denominators of every stencil position computed once per node array."""
    n = nodes.size
    k = min(4, n)
    i = np.clip(np.searchsorted(nodes, t, side="right") - 2, 0, n - k)
    idx = i[:, None] + np.arange(k)[None, :]
    d = [t - nodes[i + b] for b in range(k)]  # t - x_b
    # the product of all d but d_a (no division by d, which may vanish on a node)
    num = np.ones((t.size, k))
    for a in range(k):
        for b in range(k):
            if b != a:
                num[:, a] *= d[b]
    return idx, num * _inverse_denominators(nodes, k)[i]


#: 1 / prod_(b != a) (x_a - x_b) per node array (keyed by its bytes) and stencil size
_DENOMINATORS: dict[tuple[bytes, int], np.ndarray] = {}


def _inverse_denominators(nodes: np.ndarray, k: int) -> np.ndarray:
    """1 / prod_(b != a) (x_a - x_b) for the stencil starting at each node, shape (n - k + 1, k)."""
    key = (nodes.tobytes(), k)
    if key not in _DENOMINATORS:
        xs = nodes[np.arange(nodes.size - k + 1)[:, None] + np.arange(k)[None, :]]
        den = np.ones_like(xs)
        for a in range(k):
            for b in range(k):
                if a != b:
                    den[:, a] *= xs[:, a] - xs[:, b]
        _DENOMINATORS[key] = 1.0 / den
    return _DENOMINATORS[key]


def _parse_member(text: str, source: str) -> list[Block]:
    parts = text.split("\n---")
    if len(parts) < 2:
        raise PdfError(f"{source}: no '---' block separator: not a lhagrid1 member file")
    head = parts[0]
    if "lhagrid1" not in head:
        raise PdfError(f"{source}: format is not lhagrid1 (header {head.strip()[:60]!r})")
    blocks = []
    for nb, part in enumerate(parts[1:], 1):
        lines = [ln for ln in part.strip().splitlines() if ln.strip()]
        if not lines:
            continue
        if len(lines) < 4:
            raise PdfError(f"{source}: block {nb} has {len(lines)} lines; expected x, Q, flavour lines and values")
        try:
            x = np.array(lines[0].split(), float)
            q = np.array(lines[1].split(), float)
            pids = tuple(int(v) for v in lines[2].split())
            vals = np.array(" ".join(lines[3:]).split(), float)
        except ValueError as exc:
            raise PdfError(f"{source}: block {nb}: malformed number ({exc})") from None
        expected = x.size * q.size * len(pids)
        if vals.size != expected:
            raise PdfError(f"{source}: block {nb}: {vals.size} values, expected {x.size} x {q.size} x {len(pids)} = {expected}")
        if not (np.all(np.isfinite(x)) and np.all(np.isfinite(q)) and np.all(np.isfinite(vals))):
            raise PdfError(f"{source}: block {nb}: non-finite numbers (nan or inf) in the grid")
        if x[0] <= 0 or x[-1] > 1 or q[0] <= 0:
            raise PdfError(f"{source}: block {nb}: x nodes must lie in (0, 1] and Q nodes be positive")
        if np.any(np.diff(x) <= 0) or np.any(np.diff(q) <= 0):
            raise PdfError(f"{source}: block {nb}: x or Q nodes are not increasing")
        pids = tuple(21 if p == 0 else p for p in pids)
        blocks.append(Block(x, q, pids, vals.reshape(x.size, q.size, len(pids))))
    if not blocks:
        raise PdfError(f"{source}: no data blocks")
    return blocks


class AlphaS:
    """alpha_s(Q): interpolated from a set's metadata, or run from alpha_s(q_ref) (m_Z by default) at one or two loops.

    Running solves mu^2 d alpha/d mu^2 = -b0 alpha^2 - b1 alpha^3, b0 = (33 - 2 nf)/(12 pi),
    b1 = (153 - 19 nf)/(24 pi^2), numerically (fourth-order Runge-Kutta in log mu^2), continuous at
    the flavour thresholds (leading-order matching).
    """

    def __init__(self, *, qs=None, values=None, alpha_ref: float | None = None, q_ref: float = 91.1876,
                 loops: int = 2, thresholds=(1.4, 4.75, 172.5)):
        self.qs = None if qs is None else np.asarray(qs, float)
        self.values = None if values is None else np.asarray(values, float)
        self.alpha_ref, self.q_ref, self.loops, self.thresholds = alpha_ref, q_ref, loops, tuple(thresholds)
        if self.qs is None and alpha_ref is None:
            raise ValueError("give tabulated values or alpha_s at a reference scale")

    @staticmethod
    def _beta(alpha, nf, loops):
        b0 = (33.0 - 2.0 * nf) / (12.0 * math.pi)
        b1 = (153.0 - 19.0 * nf) / (24.0 * math.pi**2)
        return -b0 * alpha * alpha - (b1 * alpha**3 if loops >= 2 else 0.0)

    def _nf(self, q):
        return 3 + sum(q > t for t in self.thresholds)

    def _run(self, q: float) -> float:
        # integrate from q_ref to q in log mu^2, stopping at each threshold crossed
        alpha, lq = self.alpha_ref, math.log(self.q_ref**2)
        target = math.log(q * q)
        stops = sorted({math.log(t * t) for t in self.thresholds if min(lq, target) < math.log(t * t) < max(lq, target)},
                       reverse=target < lq)
        for end in stops + [target]:
            steps = max(8, int(abs(end - lq) / 0.02))
            h = (end - lq) / steps
            nf = self._nf(math.exp(0.5 * (lq + 0.5 * h)))
            for _ in range(steps):
                k1 = self._beta(alpha, nf, self.loops)
                k2 = self._beta(alpha + 0.5 * h * k1, nf, self.loops)
                k3 = self._beta(alpha + 0.5 * h * k2, nf, self.loops)
                k4 = self._beta(alpha + h * k3, nf, self.loops)
                alpha += h * (k1 + 2 * k2 + 2 * k3 + k4) / 6.0
            lq = end
        return alpha

    def tabulated(self, q_min: float = 1.0, q_max: float = 1e5, n: int = 600) -> "AlphaS":
        """The same running as a table in log Q (nodes repeated at the thresholds), for fast
        vectorized evaluation; cubic interpolation reproduces the solution to about 1e-8."""
        if self.qs is not None:
            return self
        nodes = list(np.geomspace(q_min, q_max, n))
        for t in self.thresholds:
            if q_min < t < q_max:
                nodes += [t, t]
        qs = np.sort(np.array(nodes))
        vals = np.empty_like(qs)
        for i, q in enumerate(qs):
            below = i + 1 < qs.size and qs[i + 1] == q  # first of a repeated threshold node
            vals[i] = self._run(q * (1 - 1e-12) if below else q)
        return AlphaS(qs=qs, values=vals)

    def __call__(self, q):
        q = np.atleast_1d(np.asarray(q, float))
        if self.qs is not None:
            lq = np.log(self.qs**2)
            t = np.clip(np.log(q * q), lq[0], lq[-1])
            out = np.empty_like(t)
            # interpolate within each flavour-threshold segment (the table repeats a node at thresholds)
            cuts = np.flatnonzero(np.diff(lq) == 0) + 1
            seg_starts = np.concatenate([[0], cuts])
            seg_ends = np.concatenate([cuts, [lq.size]])
            seg = np.searchsorted(lq[seg_ends - 1], t, side="left").clip(0, seg_starts.size - 1)
            for k in range(seg_starts.size):
                sel = seg == k
                if sel.any():
                    nodes = lq[seg_starts[k]:seg_ends[k]]
                    idx, w = _lagrange4(nodes, t[sel])
                    out[sel] = (self.values[seg_starts[k]:seg_ends[k]][idx] * w).sum(axis=1)
            return out
        return np.array([self._run(float(v)) for v in q])


class PdfSet:
    """One member of a set: x f(x, Q) for PDG ids (21 = gluon), vectorized, and its alpha_s."""

    def __init__(self, name: str, info: dict, blocks: list[Block], member: int, folder: Path):
        self.name, self.info, self.blocks, self.member, self.folder = name, info, blocks, member, folder
        self.pids = blocks[0].pids
        self._qmax = np.array([b.q[-1] for b in blocks])
        self._column_cache: dict = {}
        if "AlphaS_Qs" in info and "AlphaS_Vals" in info:
            self.alpha_s = AlphaS(qs=info["AlphaS_Qs"], values=info["AlphaS_Vals"])
        else:
            self.alpha_s = AlphaS(alpha_ref=float(info.get("AlphaS_MZ", 0.118)), q_ref=float(info.get("MZ", 91.1876)),
                                  loops=int(info.get("AlphaS_OrderQCD", 1)) + 1,
                                  thresholds=(info.get("MCharm", 1.4), info.get("MBottom", 4.75), info.get("MTop", 172.5)))

    @property
    def description(self) -> str:
        return str(self.info.get("SetDesc", self.name))

    def _columns(self, pids: tuple[int, ...]):
        """Rows of the output that the set holds, and per block its values of those flavours as (nx nq, F)."""
        key = tuple(pids)
        if key not in self._column_cache:
            ids = [21 if p == 0 else p for p in pids]
            rows = [i for i, p in enumerate(ids) if p in self.pids]
            cols = [self.pids.index(ids[i]) for i in rows]
            flat = [np.ascontiguousarray(b.values[:, :, cols].reshape(-1, len(cols))) for b in self.blocks]
            self._column_cache[key] = (rows, flat)
        return self._column_cache[key]

    def xfx_many(self, pids, x, q) -> np.ndarray:
        """x f(x, Q) of several PDG ids at once, shape (len(pids), N), with one interpolation stencil
        for all flavours (the hot path of hadron-collider runs)."""
        x = np.atleast_1d(np.asarray(x, float))
        q = np.broadcast_to(np.asarray(q, float), x.shape)
        rows, flat = self._columns(tuple(pids))
        out = np.zeros((len(pids), x.size))
        which = np.clip(np.searchsorted(self._qmax, q, side="left"), 0, len(self.blocks) - 1)
        for k, b in enumerate(self.blocks):
            sel = np.flatnonzero(which == k) if len(self.blocks) > 1 else np.arange(x.size)
            if not sel.size:
                continue
            lx = np.log(np.clip(x[sel], b.x[0], b.x[-1]))
            lq = np.log(np.clip(q[sel], b.q[0], b.q[-1]) ** 2)
            ix, wx = _lagrange4(b.logx, lx)
            iq, wq = _lagrange4(b.logq2, lq)
            m = sel.size
            idx = (ix[:, :, None] * b.q.size + iq[:, None, :]).reshape(m, -1)
            w = (wx[:, :, None] * wq[:, None, :]).reshape(m, -1)
            vals = np.einsum("nk,nkf->fn", w, flat[k][idx], optimize=True)
            if len(rows) == len(pids):
                out[:, sel] = vals
            else:
                out[np.ix_(rows, sel)] = vals
        out[:, x >= 1.0] = 0.0
        return out

    def xfx(self, pid: int, x, q) -> np.ndarray:
        """x f(x, Q) for PDG id `pid` at arrays x and Q (GeV); 0 for flavours the set does not hold."""
        return self.xfx_many((pid,), x, q)[0]


def find_set(name_or_path: str | Path, search: list[str | Path] | None = None) -> Path:
    """The folder of a set given by name (searched as the module docstring says) or by folder."""
    p = Path(name_or_path)
    if p.is_dir():
        return p.resolve()
    candidates = [Path(d) / str(name_or_path) for d in (search or [])]
    candidates += [Path(d) / str(name_or_path) for d in os.environ.get(SEARCH_PATH_VARIABLE, "").split(os.pathsep) if d]
    shipped = resources.files("gen.physics.pdfsets") / str(name_or_path)
    candidates.append(Path(str(shipped)))
    for c in candidates:
        if c.is_dir():
            return c.resolve()
    looked = ", ".join(str(c.parent) for c in candidates) or "nowhere"
    raise PdfError(f"parton-density set {str(name_or_path)!r} not found (looked in: {looked}; set "
                   f"{SEARCH_PATH_VARIABLE} or give the set's folder)")


@dataclass(frozen=True)
class SetHeader:
    """What a set's .info file says, read and checked without loading any member grid."""

    folder: Path
    info: dict
    members: int
    q_range: tuple[float, float]  # GeV

    @property
    def name(self) -> str:
        return self.folder.name


def _stamp(path: Path) -> tuple[int, int]:
    """(modification time, size) of a file, so that caches see a file that changed; (0, 0) if absent."""
    try:
        st = path.stat()
    except OSError:
        return 0, 0
    return st.st_mtime_ns, st.st_size


def read_header(folder: str | Path) -> SetHeader:
    """The checked metadata of the set in `folder` (a PdfError names what is wrong)."""
    path = Path(folder)
    return _read_header(str(path), _stamp(path / f"{path.name}.info"))


@lru_cache(maxsize=16)
def _read_header(folder: str, stamp: tuple[int, int]) -> SetHeader:
    path = Path(folder)
    info_path = path / f"{path.name}.info"
    if not info_path.exists():
        raise PdfError(f"{path}: no {path.name}.info: not a parton-density set folder")
    try:
        text = info_path.read_text(encoding="utf-8")
    except UnicodeDecodeError as exc:
        raise PdfError(f"{info_path}: not UTF-8 text ({exc.reason} at byte {exc.start})") from None
    except OSError as exc:
        raise PdfError(f"{info_path}: cannot read it: {exc.strerror or exc}") from None
    info = parse_info(text, str(info_path))
    members = info.get("NumMembers", 1)
    if isinstance(members, bool) or not isinstance(members, int) or members < 1:
        raise PdfError(f"{info_path}: NumMembers is {members!r}; expected a positive integer")
    q_lo, q_hi = info.get("QMin", 1.0), info.get("QMax", 1e5)
    if not all(isinstance(v, (int, float)) and math.isfinite(v) and v > 0 for v in (q_lo, q_hi)) or q_lo >= q_hi:
        raise PdfError(f"{info_path}: QMin = {q_lo!r} and QMax = {q_hi!r} are not an increasing pair of positive numbers")
    qs, vals = info.get("AlphaS_Qs"), info.get("AlphaS_Vals")
    if (qs is None) != (vals is None) or (qs is not None and (not isinstance(qs, list) or not isinstance(vals, list)
                                                            or len(qs) != len(vals) or len(qs) < 2)):
        raise PdfError(f"{info_path}: AlphaS_Qs and AlphaS_Vals must be lists of equal length (at least 2); found "
                       f"{len(qs) if isinstance(qs, list) else qs!r} and {len(vals) if isinstance(vals, list) else vals!r}")
    if qs is not None and not all(isinstance(v, (int, float)) and math.isfinite(v) for v in qs + vals):
        raise PdfError(f"{info_path}: AlphaS_Qs and AlphaS_Vals must hold numbers only")
    return SetHeader(path, info, members, (float(q_lo), float(q_hi)))


@lru_cache(maxsize=8)
def _load_cached(folder: str, member: int, stamps: tuple = ()) -> PdfSet:
    head = read_header(folder)
    path = head.folder
    if not 0 <= member < head.members:
        raise PdfError(f"{path}: member {member} does not exist; the set has members 0..{head.members - 1}")
    dat = path / f"{path.name}_{member:04d}.dat"
    try:
        if dat.exists():
            text = dat.read_text(encoding="utf-8")
        elif dat.with_name(dat.name + ".gz").exists():
            text = gzip.decompress(dat.with_name(dat.name + ".gz").read_bytes()).decode("utf-8")
        else:
            raise PdfError(f"{path}: member file {dat.name} is missing")
    except (OSError, EOFError, zlib.error, UnicodeDecodeError) as exc:
        raise PdfError(f"{dat}(.gz): cannot read the member file: {exc}") from None
    return PdfSet(path.name, head.info, _parse_member(text, str(dat)), member, path)


def load(name_or_path: str | Path = DEFAULT_SET, member: int = 0, search: list[str | Path] | None = None) -> PdfSet:
    """A member of a set, by name (searched as described in the module docstring) or folder; read
    once and kept while its files stay unchanged."""
    folder = find_set(name_or_path, search)
    dat = folder / f"{folder.name}_{member:04d}.dat"
    stamps = (_stamp(folder / f"{folder.name}.info"), _stamp(dat), _stamp(dat.with_name(dat.name + ".gz")))
    return _load_cached(str(folder), member, stamps)


def make_benchmark_set(folder: str | Path, name: str = DEFAULT_SET, dy: float = 0.1) -> Path:
    """Evolve the Les Houches benchmark input at LO with hoppet and write it as a set (needs hoppet).

    Settings of hep-ph/0204316, sec. 1.3: mu_0^2 = 2 GeV^2, alpha_s(mu_0) = 0.35, variable flavour
    number with pole masses sqrt(2), 4.5 and 175 GeV, mu_R = mu_F; x down to about 4e-8, Q from
    1 to 28000 GeV.
    """
    import hoppet

    out = Path(folder) / name
    out.mkdir(parents=True, exist_ok=True)
    hoppet.StartExtended(17.0, dy, 1.0, 28000.0, dy / 4.0, 1, -6, hoppet.factscheme_MSbar)
    hoppet.SetPoleMassVFN(math.sqrt(2.0), 4.5, 175.0)
    hoppet.Evolve(0.35, math.sqrt(2.0), 1, 1.0, hoppet.BenchmarkPDFunpol, math.sqrt(2.0))
    hoppet.WriteLHAPDFGrid(str(out / name), 0)
    info = (out / f"{name}.info").read_text()
    info = info.replace("SetDesc: <SetDesc>", "SetDesc: \"Les Houches benchmark input (hep-ph/0204316 eq. 31) evolved "
                        "at LO, variable flavour, by hoppet: a benchmark, NOT a fit to data\"")
    info = info.replace("Authors: <Authors>", "Authors: \"made by gen with hoppet\"")
    info = info.replace("Reference: <Reference>", "Reference: \"hep-ph/0204316; Salam & Rojo, CPC 180 (2009) 120\"")
    info = info.replace("ErrorType: <ErrorType>", "ErrorType: none")
    (out / f"{name}.info").write_text(info)
    return out
