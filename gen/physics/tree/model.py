"""Model files of the automatic amplitudes: read once, validated, and turned into numeric vertices.

A model file (TOML, format in DEVELOPERS.md, "Model files") has:

- ``[about]``: name, description, optionally the model it ``extends`` (whose sections it adds to),
  gauge, the default width treatment (``widths = "fixed"`` or
  ``"complex_mass"``), the library model whose input schemes resolve the parameters
  (``parameters``) and any ``extra_parameters``, and the particles treated as ``massless``;
- ``[derived]``: named expressions evaluated in order, and ``[derived_complex_mass]`` with the
  lines that the complex-mass scheme replaces;
- ``[particles]``: every particle the model has (its antiparticle is implied), with ``mass`` and
  ``width`` as expressions or ``"card"`` (the run's resolved value); spin, colour, charge and PDG
  id come from gen's particle table and are not repeated;
- ``[[vertex]]``: one interaction with its ``legs`` (all incoming; ``~f`` is the antiparticle of
  ``f``), ``form`` (the Lorentz structure), ``colour`` and couplings; ``each`` loops a vertex over
  particle lists (the product of the lists, or their pairs in order with ``zip = true``).

Forms, with the vertex factor i x coupling x structure (legs numbered from 1 in the order given):

- ``fermion-vector`` (antifermion, fermion, vector): gamma^mu (left P_L + right P_R);
- ``fermion-scalar`` (antifermion, fermion, scalar): left P_L + right P_R;
- ``vector-cubic``: g^{12}(k1 - k2)^3 + g^{23}(k2 - k3)^1 + g^{31}(k3 - k1)^2, momenta incoming;
- ``vector-quartic``: 2 g^{13} g^{24} - g^{12} g^{34} - g^{14} g^{23}; with ``colour = "adjoint"``
  (four gluons) the bracket of Peskin & Schroeder (1995), eq. (16.10);
- ``vector-vector-scalar``, ``vector-vector-scalar-scalar``: g^{12};
- ``strength-pair-scalar`` (vector, vector, scalar): (k1.k2) g^{12} - k2^1 k1^2, the product of
  two field strengths (an effective coupling such as the heavy-top g g H vertex);
- ``vector-cubic-scalar``, ``vector-quartic-scalar``: the ``vector-cubic`` and ``vector-quartic``
  structures of the vectors (their own momenta) times a scalar: the gluon terms of the same
  effective coupling;
- ``scalar-cubic``, ``scalar-quartic``: 1.

Colour: ``none`` (a colour-conserving delta where the fermions are quarks), ``fundamental``
(t^a_ij of the gluon between the antiquark and the quark, Tr t^a t^b = delta/2), ``adjoint``
(f^abc for three gluons, the f f pairs of the four-gluon vertex; other legs colourless) or
``pair`` (delta^ab of two gluons; other legs colourless).
"""

from __future__ import annotations

import itertools
import math
import tomllib
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

from ..particles import antiparticle, lookup, species
from .expressions import ExpressionError, evaluate

__all__ = ["ModelFileError", "TreeModel", "Vertex", "NumericVertex", "FORMS", "load", "MODEL_FILES"]

HERE = Path(__file__).parent
#: the model files shipped with gen, by model name
MODEL_FILES = {"standard": HERE / "standard.toml", "qed-tree": HERE / "qed.toml", "scalar-tree": HERE / "scalar.toml",
               "standard-gluon-higgs": HERE / "gluon-higgs.toml", "qcd-tree": HERE / "qcd.toml"}

#: form -> (spins of the legs as twice the spin, coupling keys)
FORMS: dict[str, tuple[tuple[int, ...], tuple[str, ...]]] = {
    "fermion-vector": ((1, 1, 2), ("left", "right")),
    "fermion-scalar": ((1, 1, 0), ("left", "right")),
    "vector-cubic": ((2, 2, 2), ("coupling",)),
    "vector-quartic": ((2, 2, 2, 2), ("coupling",)),
    "vector-vector-scalar": ((2, 2, 0), ("coupling",)),
    "vector-vector-scalar-scalar": ((2, 2, 0, 0), ("coupling",)),
    "strength-pair-scalar": ((2, 2, 0), ("coupling",)),
    "vector-cubic-scalar": ((2, 2, 2, 0), ("coupling",)),
    "vector-quartic-scalar": ((2, 2, 2, 2, 0), ("coupling",)),
    "scalar-cubic": ((0, 0, 0), ("coupling",)),
    "scalar-quartic": ((0, 0, 0, 0), ("coupling",)),
}
COLOURS = ("none", "fundamental", "adjoint", "pair")
WIDTH_SCHEMES = ("fixed", "complex_mass")


class ModelFileError(ValueError):
    """A model file that does not hold together; the message names the file, the entry and why."""


@dataclass(frozen=True)
class Vertex:
    """One vertex of a model file, its loops expanded: legs by particle name, couplings as expressions."""

    name: str
    legs: tuple[str, ...]
    form: str
    colour: str
    couplings: tuple[str, ...]
    bound: tuple[tuple[str, str], ...]  # loop variable -> particle name


@dataclass(frozen=True)
class NumericVertex:
    """A vertex with its couplings evaluated (complex numbers, in the order of FORMS)."""

    legs: tuple[str, ...]
    form: str
    colour: str
    couplings: tuple[complex, ...]
    name: str


@dataclass(frozen=True)
class TreeModel:
    """A validated model file."""

    name: str
    description: str
    gauge: str
    widths: str
    parameters: str
    extra_parameters: tuple[str, ...]
    massless: tuple[str, ...]
    derived: tuple[tuple[str, str], ...]
    derived_complex_mass: Mapping[str, str]
    particles: Mapping[str, Mapping[str, str]]
    vertices: tuple[Vertex, ...]
    path: str
    #: the library model's parameters this file takes (empty: all of them)
    takes: tuple[str, ...] = ()

    @property
    def field_names(self) -> frozenset[str]:
        """Every particle of the model, antiparticles included."""
        return frozenset(self.particles) | frozenset(antiparticle(p) for p in self.particles)

    def values(self, params: Mapping[str, object], scheme: str) -> dict[str, complex]:
        """Parameters and derived quantities (complex) for a width scheme."""
        vals: dict[str, complex] = {k: complex(v) for k, v in params.items() if isinstance(v, (int, float))}
        for name, text in self.derived:
            if scheme == "complex_mass" and name in self.derived_complex_mass:
                text = self.derived_complex_mass[name]
            vals[name] = evaluate(text, vals)
        if scheme == "complex_mass":
            for name, text in self.derived_complex_mass.items():
                if name not in dict(self.derived):
                    vals[name] = evaluate(text, vals)
            # the overrides of inputs (sw2) feed the derived lines that follow them: evaluate again
            for name, text in self.derived:
                vals[name] = evaluate(self.derived_complex_mass.get(name, text), vals)
        return vals

    def entry(self, name: str) -> tuple[str, Mapping[str, str]]:
        """The [particles] entry of a particle or of its antiparticle."""
        if name in self.particles:
            return name, self.particles[name]
        anti = antiparticle(name)
        if anti in self.particles:
            return anti, self.particles[anti]
        raise KeyError(name)

    def mass_of(self, name: str, params: Mapping[str, object], card: Callable[[str], float]) -> float:
        """A particle's mass (GeV): 0 when massless here, its expression, else the card's value."""
        base, entry = self.entry(name)
        if base in self.massless:
            return 0.0
        text = entry.get("mass", "card")
        return float(card(name)) if text == "card" else float(evaluate(text, self.values(params, "fixed")).real)

    def width_of(self, name: str, params: Mapping[str, object], card: Callable[[str], float]) -> float:
        """A particle's width (GeV): its expression, the card's value for "card", else 0 (stable)."""
        _, entry = self.entry(name)
        text = entry.get("width", "0")
        return float(card(name)) if text == "card" else float(evaluate(text, self.values(params, "fixed")).real)

    def numeric(self, params: Mapping[str, object], scheme: str, mass_of: Callable[[str], float],
                ckm: Callable[[str, str], complex] | None = None) -> tuple[NumericVertex, ...]:
        """The vertices with couplings evaluated; vertices whose couplings are all zero are left out."""
        vals = self.values(params, scheme)
        funcs = {"Q": lambda f: species(f).charge, "T3": lambda f: species(f).t3, "mass": mass_of,
                 "ckm": ckm or (lambda u, d: 1.0 if "udsctb".index(u) // 2 == "udsctb".index(d) // 2 else 0.0)}
        out = []
        for v in self.vertices:
            try:
                cs = tuple(evaluate(c, vals, funcs, dict(v.bound)) for c in v.couplings)
            except ExpressionError as exc:
                raise ModelFileError(f"{self.path}: vertex {v.name!r} {v.legs}: {exc}") from None
            if any(c != 0 for c in cs):
                out.append(NumericVertex(v.legs, v.form, v.colour, cs, v.name))
        return tuple(out)


def _fail(path, where, message) -> ModelFileError:
    return ModelFileError(f"{path}: {where}: {message}")


def _expand(path, i, raw) -> list[Vertex]:
    where = f"vertex {i + 1} ({raw.get('name', 'unnamed')!r})"
    allowed = {"name", "each", "zip", "legs", "form", "colour"}
    form = raw.get("form")
    if form not in FORMS:
        raise _fail(path, where, f"form {form!r} is not one of {', '.join(FORMS)}")
    spins, keys = FORMS[form]
    unknown = set(raw) - allowed - set(keys)
    if unknown:
        raise _fail(path, where, f"unknown keys {sorted(unknown)}; accepted: {sorted(allowed | set(keys))}")
    missing = [k for k in keys if k not in raw]
    if missing:
        raise _fail(path, where, f"form {form!r} needs {', '.join(keys)}; missing {', '.join(missing)}")
    colour = raw.get("colour", "none")
    if colour not in COLOURS:
        raise _fail(path, where, f"colour {colour!r} is not one of {', '.join(COLOURS)}")
    legs = raw.get("legs")
    if not isinstance(legs, list) or len(legs) != len(spins):
        raise _fail(path, where, f"form {form!r} has {len(spins)} legs, found {legs!r}")
    each = raw.get("each", {})
    names = list(each)
    lists = [each[k] for k in names]
    if raw.get("zip"):
        if len({len(x) for x in lists}) > 1:
            raise _fail(path, where, "zip = true needs lists of one length")
        combos = list(zip(*lists))
    else:
        combos = list(itertools.product(*lists)) if lists else [()]
    out = []
    for combo in combos:
        bound = dict(zip(names, combo))
        resolved = []
        for leg in legs:
            anti = leg.startswith("~")
            base = bound.get(leg.lstrip("~"), leg.lstrip("~"))
            try:
                sp = lookup(base, str(path), where)
            except Exception as exc:
                raise _fail(path, where, f"leg {leg!r}: {exc}") from None
            resolved.append(antiparticle(sp.name) if anti else sp.name)
        vx = Vertex(raw.get("name", f"vertex {i + 1}"), tuple(resolved), form, colour,
                    tuple(str(raw[k]) for k in keys), tuple(bound.items()))
        _check_vertex(path, where, vx, spins)
        out.append(vx)
    return out


def _check_vertex(path, where, vx: Vertex, spins) -> None:
    sps = [species(n) for n in vx.legs]
    label = f"{where} {' '.join(vx.legs)}"
    for sp, s2 in zip(sps, spins):
        if sp.spin2 != s2:
            raise _fail(path, label, f"{sp.name} has spin {sp.spin2}/2, the form {vx.form!r} needs {s2}/2 there")
    if abs(sum(sp.charge for sp in sps)) > 1e-9:
        raise _fail(path, label, "does not conserve electric charge")
    if vx.form.startswith("fermion-"):
        a, f = sps[0], sps[1]
        if a.pdg >= 0 or f.pdg <= 0:
            raise _fail(path, label, "the first leg must be an antifermion and the second a fermion")
        if sum(a.lepton_numbers) + sum(f.lepton_numbers) != 0 or a.quark_number + f.quark_number != 0:
            raise _fail(path, label, "does not conserve lepton or quark number")
    cols = [sp.colour for sp in sps]
    if vx.colour == "fundamental":
        if not (cols[0] == -3 and cols[1] == 3 and cols[2] == 8):
            raise _fail(path, label, "colour 'fundamental' needs an antiquark, a quark and a gluon")
    elif vx.colour == "adjoint":
        if cols.count(8) < 3 or any(c not in (1, 8) for c in cols):
            raise _fail(path, label, "colour 'adjoint' needs three or four gluons and colourless legs only")
    elif vx.colour == "pair":
        if cols.count(8) != 2 or any(c not in (1, 8) for c in cols):
            raise _fail(path, label, "colour 'pair' needs two gluons and colourless legs only")
    elif vx.form in ("vector-cubic-scalar", "vector-quartic-scalar", "strength-pair-scalar") and 8 in cols:
        raise _fail(path, label, f"gluons at a {vx.form!r} vertex need colour 'adjoint' or 'pair'")
    else:
        if any(c == 8 for c in cols) or (cols.count(3) != cols.count(-3)):
            raise _fail(path, label, "colour 'none' allows colourless legs and one quark-antiquark pair")


def _read(path, seen: tuple) -> dict:
    """A model file's document with the model it `extends` (in [about]: a shipped name or a path
    beside it) merged in: the base's [derived] lines first, its particles and [about] entries
    unless this file sets them, its vertices then this file's."""
    try:
        doc = tomllib.loads(Path(path).read_text())
    except (OSError, tomllib.TOMLDecodeError) as exc:
        raise ModelFileError(f"{path}: {exc}") from None
    unknown = set(doc) - {"about", "derived", "derived_complex_mass", "particles", "vertex"}
    if unknown:
        raise _fail(path, "top level", f"unknown sections {sorted(unknown)}")
    base_name = doc.get("about", {}).pop("extends", None)
    if base_name is None:
        return doc
    base_path = MODEL_FILES.get(base_name, Path(path).parent / str(base_name))
    if str(base_path) in seen or str(base_path) == str(path):
        raise _fail(path, "[about] extends", f"{base_name!r} extends this file again (a loop)")
    base = _read(base_path, seen + (str(path),))
    merged = {"about": {**base.get("about", {}), **doc.get("about", {})},
              "derived": {**base.get("derived", {}), **doc.get("derived", {})},
              "derived_complex_mass": {**base.get("derived_complex_mass", {}), **doc.get("derived_complex_mass", {})},
              "particles": {**base.get("particles", {}), **doc.get("particles", {})},
              "vertex": list(base.get("vertex", [])) + list(doc.get("vertex", []))}
    return merged


@lru_cache(maxsize=None)
def load(name_or_path: str) -> TreeModel:
    """The validated model of a shipped name (see MODEL_FILES) or a file path."""
    path = MODEL_FILES.get(name_or_path, Path(name_or_path))
    doc = _read(path, ())
    about = doc.get("about", {})
    for k in ("name", "description", "parameters"):
        if k not in about:
            raise _fail(path, "[about]", f"needs {k}")
    widths = about.get("widths", "fixed")
    if widths not in WIDTH_SCHEMES:
        raise _fail(path, "[about] widths", f"{widths!r} is not one of {', '.join(WIDTH_SCHEMES)}")
    particles = {}
    for name, entry in doc.get("particles", {}).items():
        sp = lookup(name, str(path), f"[particles] {name}")
        bad = set(entry) - {"mass", "width"}
        if bad:
            raise _fail(path, f"[particles] {name}", f"unknown keys {sorted(bad)}; accepted: mass, width")
        particles[sp.name] = {k: str(v) for k, v in entry.items()}
    massless = tuple(about.get("massless", ()))
    for m in massless:
        if m not in particles:
            raise _fail(path, "[about] massless", f"{m!r} is not under [particles]")
    vertices: list[Vertex] = []
    for i, raw in enumerate(doc.get("vertex", [])):
        vertices.extend(_expand(path, i, raw))
    fields = frozenset(particles) | frozenset(antiparticle(p) for p in particles)
    for v in vertices:
        for leg in v.legs:
            if leg not in fields:
                raise _fail(path, f"vertex {v.name!r}", f"leg {leg!r} is not a particle of [particles]")
    return TreeModel(about["name"], about["description"], about.get("gauge", "unitary"), widths,
                     about["parameters"], tuple(about.get("extra_parameters", ())), massless,
                     tuple((k, str(v)) for k, v in doc.get("derived", {}).items()),
                     {k: str(v) for k, v in doc.get("derived_complex_mass", {}).items()}, particles,
                     tuple(vertices), str(path), tuple(about.get("takes", ())))


def ckm_from(params: Mapping[str, object]) -> Callable[[str, str], float]:
    """The quark-mixing matrix of the electroweak model's parameters: two-generation Cabibbo mixing,
    the third generation unmixed (V_tb = 1)."""
    th = float(params.get("cabibbo_angle", 0.0))
    c, s = math.cos(th), math.sin(th)
    table = {("u", "d"): c, ("u", "s"): s, ("c", "d"): -s, ("c", "s"): c, ("t", "b"): 1.0}
    return lambda u, d: table.get((u, d), 0.0)
