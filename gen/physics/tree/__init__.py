"""Automatic tree amplitudes: model files of our own (`model`), external states (`external`),
the off-shell recursion (`recursion`) and squared amplitudes of a process (`amplitudes`).

`build` is the short way from particle names to a `TreeAmplitude`, with the parameters resolved
by the library model whose input schemes the model file names."""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence

from ..particles import antiparticle, species
from .amplitudes import ProcessRefused, TreeAmplitude
from .model import MODEL_FILES, ModelFileError, TreeModel, load

__all__ = ["build", "allowed", "singular_lines", "resolve", "hadron_subprocesses", "HADRON_MASSLESS", "TreeAmplitude",
           "ProcessRefused", "ModelFileError", "TreeModel", "load",
           "MODEL_FILES", "interchangeable_quarks"]


def resolve(model: str, given: Mapping[str, object] | None = None) -> dict:
    """The parameters of a model file: its library model's resolved parameters plus the extras
    (alpha_s: 0.118 unless given)."""
    from ..matrix import MODELS

    tm = load(model)
    given = dict(given or {})
    base = MODELS[tm.parameters]
    par = dict(base.resolve({k: v for k, v in given.items() if k in base.params}))
    if "alpha_s" in tm.extra_parameters:
        par["alpha_s"] = float(given.get("alpha_s", 0.118))
    par["width_scheme"] = str(given.get("width_scheme", tm.widths))
    return par


def build(model: str, incoming: Sequence[str], outgoing: Sequence[str], given: Mapping[str, object] | None = None,
          masses: Mapping[str, float] | None = None, widths: Mapping[str, float] | None = None,
          params: Mapping[str, object] | None = None, **options) -> TreeAmplitude:
    """The `TreeAmplitude` of a process in a model file. Parameters: `params` as resolved, or
    resolved here from `given` (card values). Masses and widths of the particles the file leaves to
    the card: from `masses` and `widths` (by particle name), else PDG."""
    mass_of, width_of, par = _mass_functions(model, given, masses, widths, params)
    return TreeAmplitude(model, incoming, outgoing, par, mass_of, width_of,
                         str(par.get("width_scheme", load(model).widths)), **options)


def allowed(model: str, incoming: Sequence[str], outgoing: Sequence[str], params: Mapping[str, object] | None = None,
            masses: Mapping[str, float] | None = None) -> str | None:
    """Why the model has no tree amplitude for these particles (the rule broken), or None."""
    from .amplitudes import conservation
    from .model import ckm_from
    from .recursion import Leg, Recursion

    tm = load(model)
    names = list(incoming) + list(outgoing)
    missing = [n for n in names if n not in tm.field_names]
    if missing:
        return f"the {model} model has no particle {missing[0]!r}; it has " + ", ".join(sorted(tm.field_names))
    mass_of, width_of, par = _mass_functions(model, None, masses, None, params)
    legs = [Leg(n, True, mass_of(n)) for n in incoming] + [Leg(n, False, mass_of(n)) for n in outgoing]
    why = conservation(legs)
    if why:
        return why
    vertices = tm.numeric(par, "fixed", mass_of, ckm_from(par))
    rec = Recursion(legs, vertices, {}, {})
    if not rec.exists:
        return "no vertex of the model joins these particles at tree level"
    return None


def interchangeable_quarks(model: str, params: Mapping[str, object] | None = None,
                           masses: Mapping[str, float] | None = None,
                           widths: Mapping[str, float] | None = None) -> list[tuple[str, ...]]:
    """Classes of quark flavours that the model cannot tell apart: same mass and width, and
    swapping two of them (with their antiquarks) maps the set of vertices, couplings included,
    onto itself. Any amplitude is then unchanged when flavours of one class are renamed within it
    (in the pure-QCD model every light flavour is in one class; in the standard model none are,
    their electroweak charges differ)."""
    from .model import ckm_from

    tm = load(model)
    mass_of, width_of, par = _mass_functions(model, None, masses, widths, params)
    vertices = tm.numeric(par, "fixed", mass_of, ckm_from(par))

    def signature(rename):
        return sorted((tuple(rename.get(leg, leg) for leg in v.legs), v.form, v.colour,
                       tuple(complex(round(c.real, 12), round(c.imag, 12)) for c in v.couplings)) for v in vertices)

    plain = signature({})
    quarks = [q for q in ("d", "u", "s", "c", "b", "t") if q in tm.field_names]
    classes: list[list[str]] = []
    for q in quarks:
        for cls in classes:
            r = cls[0]
            if (mass_of(q), width_of(q)) != (mass_of(r), width_of(r)):
                continue
            swap = {q: r, r: q, antiparticle(q): antiparticle(r), antiparticle(r): antiparticle(q)}
            if signature(swap) == plain:
                cls.append(q)
                break
        else:
            classes.append([q])
    return [tuple(c) for c in classes if len(c) > 1]


#: particles massless in hadron collisions beyond those the model files treat as massless (the
#: five-flavour scheme: the b quark is a parton; leptons are massless there)
HADRON_MASSLESS = {"b": 0.0, "tau-": 0.0}


def hadron_subprocesses(model: str, beams: Sequence[str], slots: Sequence[Sequence[str]],
                        same_slot: Sequence[int], params: Mapping[str, object] | None = None,
                        masses: Mapping[str, float] | None = None) -> list[tuple[tuple[str, str], tuple[str, ...]]]:
    """Every parton process (partons of beams 1 and 2, the particle in each outgoing slot) that
    the model has at tree level, with the slots filled from their members. `same_slot[k]` is the
    first slot with the same card name as slot k: such slots are filled in one order only
    (members in non-decreasing order), so that no final state is counted twice."""
    import itertools

    from ..particles import HADRON_PARTONS
    from .amplitudes import conservation
    from .model import ckm_from
    from .recursion import Leg, Recursion

    tm = load(model)
    mass_of, _, par = _mass_functions(model, None, dict(HADRON_MASSLESS, **(masses or {})), None, params)
    vertices = tm.numeric(par, "fixed", mass_of, ckm_from(par))
    # the slot before each slot with the same card name (-1 for the first)
    before = [max((j for j in range(k) if same_slot[j] == same_slot[k]), default=-1) for k in range(len(slots))]
    exists: dict[tuple, bool] = {}
    out = []
    for a in HADRON_PARTONS[beams[0]]:
        for b in HADRON_PARTONS[beams[1]]:
            for fill in itertools.product(*[range(len(m)) for m in slots]):
                if any(j >= 0 and fill[k] < fill[j] for k, j in enumerate(before)):
                    continue
                names = tuple(slots[k][i] for k, i in enumerate(fill))
                legs = [Leg(a, True, 0.0), Leg(b, True, 0.0)] + [Leg(n, False, 0.0) for n in names]
                if any(n not in tm.field_names for n in (a, b) + names) or conservation(legs):
                    continue
                key = (tuple(sorted((a, b))), tuple(sorted(names)))
                if key not in exists:
                    legs = [Leg(a, True, mass_of(a)), Leg(b, True, mass_of(b))] + [Leg(n, False, mass_of(n))
                                                                                   for n in names]
                    exists[key] = Recursion(legs, vertices, {}, {}).exists
                if exists[key]:
                    out.append(((a, b), names))
    return out


def singular_lines(model: str, incoming: Sequence[str], outgoing: Sequence[str],
                   params: Mapping[str, object] | None = None, masses: Mapping[str, float] | None = None):
    """Where the amplitude has soft or collinear singularities, as (kind, legs): "final" for two
    massless outgoing particles joined by a massless line, "initial" for a massless outgoing
    particle joined to a massless beam particle by a massless line, "soft" for an outgoing photon
    or gluon with two or more outgoing particles besides it. Legs are indices in card order."""
    from .model import ckm_from
    from .recursion import Leg, Recursion

    tm = load(model)
    mass_of, _, par = _mass_functions(model, None, masses, None, params)
    legs = [Leg(n, True, mass_of(n)) for n in incoming] + [Leg(n, False, mass_of(n)) for n in outgoing]
    rec = Recursion(legs, tm.numeric(par, "fixed", mass_of, ckm_from(par)), {}, {})
    n, n_in = len(legs), len(incoming)
    every = (1 << n) - 1
    found: list[tuple[str, tuple[int, ...]]] = []
    for mask, label in rec.joins:
        if mass_of(label) > 0.0:
            continue
        for side in (mask, every ^ mask):
            idx = tuple(i for i in range(n) if side >> i & 1)
            ins = [i for i in idx if i < n_in]
            outs = [i for i in idx if i >= n_in]
            if any(legs[i].mass > 0 for i in idx):
                continue
            if not ins and len(outs) == 2 < len(outgoing):
                found.append(("final", tuple(outs)))
            elif len(ins) == 1 and len(outs) == 1:
                found.append(("initial", (ins[0], outs[0])))
    if len(outgoing) >= 3:
        for i, name in enumerate(outgoing):
            if name in ("g", "gamma"):
                found.append(("soft", (n_in + i,)))
    return sorted(set(found))


def _mass_functions(model, given, masses, widths, params):
    from ..matrix import MODELS

    tm = load(model)
    par = dict(params) if params is not None else resolve(model, given)
    lib = MODELS[tm.parameters]
    governed, governed_w = lib.masses(par), lib.widths(par)

    def by_pdg(table: Mapping[str, float] | None, name: str):
        for k, v in (table or {}).items():
            if abs(species(k).pdg) == abs(species(name).pdg):
                return v
        return None

    def card_mass(name: str) -> float:
        m = by_pdg(governed, name)
        m = by_pdg(masses, name) if m is None else m
        return species(name).mass if m is None else m

    def card_width(name: str) -> float:
        w = by_pdg(governed_w, name)
        w = by_pdg(widths, name) if w is None else w
        return species(name).width if w is None else w

    mass_of: Callable[[str], float] = lambda n: tm.mass_of(n, par, card_mass)  # noqa: E731
    width_of: Callable[[str], float] = lambda n: tm.width_of(n, par, card_width)  # noqa: E731
    return mass_of, width_of, par
