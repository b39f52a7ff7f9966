"""Run cards: TOML in, a validated and typed `RunConfig` out.

Every key a card may hold is described once, in `SPEC` below; the card reference in the README is
made from it (`reference_markdown`). Errors name the card file and the key path, say what was
found and what is accepted, and suggest the closest key or particle name.
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from .decays import parse_decays
from .errors import CardError, close_matches
from .matrix import MODELS, find_process, find_subprocesses
from .particles import HADRON_PARTONS, Species, lookup

__all__ = ["RunConfig", "load_card", "parse_card", "SPEC", "reference_markdown"]


@dataclass(frozen=True)
class Key:
    """One card key: its type, default, allowed range or choices, unit and meaning."""

    kind: type | tuple[type, ...]
    default: Any = None
    lo: float | None = None
    hi: float | None = None
    unit: str = ""
    doc: str = ""
    choices: tuple[str, ...] = ()
    required: bool = False


_NUM = (int, float)

#: The card's sections and keys. `parameters` is checked against the chosen model instead.
SPEC: dict[str, dict[str, Key]] = {
    "process": {
        "model": Key(str, required=True, choices=tuple(MODELS), doc="model of the process library"),
        "incoming": Key(list, required=True, doc="two incoming particles (names or PDG ids), or two hadrons (p, pbar); the "
                        "first moves along +z; or one particle, which decays at rest (no [collider]; the integral is its partial width)"),
        "outgoing": Key(list, required=True, doc="two or three outgoing particles (names or PDG ids); with hadron "
                        "beams one or two, and group names (jet, quark, antiquark, l-, l+, nu, nubar) stand for any of their members"),
    },
    "collider": {
        "sqrt_s": Key(_NUM, lo=0.0, unit="GeV", doc="head-on beams of equal energy sqrt_s/2 (laboratory = centre-of-mass frame)"),
        "beam_energies": Key(list, unit="GeV", doc="[E1, E2]: head-on beams of these energies, beam 1 along +z"),
        "beam_energy": Key(_NUM, lo=0.0, unit="GeV", doc="fixed target: beam 1 of this energy along +z onto particle 2 at rest"),
    },
    "cuts": {
        "particles": Key(list, doc="outgoing particles the cuts apply to (default: all outgoing)"),
        "theta_min_deg": Key(_NUM, 0.0, 0.0, 180.0, "deg", "smallest polar angle to +z in the laboratory, each particle"),
        "theta_max_deg": Key(_NUM, 180.0, 0.0, 180.0, "deg", "largest polar angle to +z in the laboratory, each particle"),
        "energy_min": Key(_NUM, 0.0, 0.0, None, "GeV", "smallest laboratory energy, each particle"),
        "energy_max": Key(_NUM, math.inf, 0.0, None, "GeV", "largest laboratory energy, each particle"),
        "pt_min": Key(_NUM, 0.0, 0.0, None, "GeV", "smallest transverse momentum, each particle"),
        "pt_max": Key(_NUM, math.inf, 0.0, None, "GeV", "largest transverse momentum, each particle"),
        "mass_min": Key(_NUM, 0.0, 0.0, None, "GeV", "smallest invariant mass of the selected particles together"),
        "mass_max": Key(_NUM, math.inf, 0.0, None, "GeV", "largest invariant mass of the selected particles together"),
        "pair_mass_min": Key(_NUM, 0.0, 0.0, None, "GeV", "smallest invariant mass of every pair of selected particles"),
        "eta_max": Key(_NUM, math.inf, 0.0, None, "", "largest |pseudorapidity| in the laboratory, each particle"),
        "rapidity_max": Key(_NUM, math.inf, 0.0, None, "", "largest |rapidity| in the laboratory, each particle"),
        "delta_r_min": Key(_NUM, 0.0, 0.0, None, "", "smallest Delta R = sqrt(Delta eta^2 + Delta phi^2) of every pair of selected particles"),
    },
    "partons": {
        "set": Key(str, "genbench-lo", doc="parton-density set: a name searched in LHAPDF_DATA_PATH and the sets shipped "
                   "with gen, or a set's folder (default: the shipped benchmark set, not a fit to data)"),
        "member": Key(int, 0, 0, 10000, "", "member of the set"),
        "alpha_s": Key(str, "set", doc="running coupling: from the set's metadata, or run at one or two loops from alpha_s_mz",
                       choices=("set", "one_loop", "two_loop")),
        "alpha_s_mz": Key(_NUM, 0.118, 0.05, 0.3, "", "alpha_s(m_Z) for alpha_s = one_loop or two_loop"),
    },
    "scales": {
        "renormalization": Key((str, int, float), "auto", unit="GeV", doc="scale of alpha_s: sqrt_shat, half_ht (half "
                               "the scalar sum of the outgoing transverse masses), pt (of the first outgoing particle), a "
                               "number in GeV, or auto: half_ht when coloured or massive particles come out, else sqrt_shat; "
                               "dynamic scales are floored at 1 GeV"),
        "factorization": Key((str, int, float), "auto", unit="GeV", doc="scale of the parton densities (same choices)"),
        "factor": Key(_NUM, 1.0, 0.01, 100.0, "", "multiplies both scales (vary it to estimate the scale uncertainty)"),
    },
    "integration": {
        "warmup_iterations": Key(int, 5, 0, 1000, "", "vegas iterations that adapt the grid and are discarded"),
        "iterations": Key(int, 10, 1, 1000, "", "vegas iterations whose weighted average is the cross-section"),
        "points_per_iteration": Key(int, 20000, 100, 1e9, "", "integrand evaluations per iteration"),
        "consistency_min_q": Key(_NUM, 0.01, 0.0, 1.0, "", "warn when the iterations' chi-square Q falls below this"),
    },
    "sampling": {
        "events": Key(int, 10000, 0, 1e12, "", "unweighted events to write"),
        "weighted_events": Key(int, 10000, 0, 1e12, "", "sampled points to write as weighted events (0: no weighted file)"),
        "seed": Key(int, 1, 0, 2**63 - 1, "", "seed of the run's random streams"),
        "calibration_points": Key(int, 100000, 1000, 1e9, "", "points drawn from the adapted map to find the maximum weight"),
        "chunk": Key(int, 50000, 1000, 1e7, "", "points handled per vectorized step"),
    },
    "output": {
        "folder": Key(str, doc="run folder (default: gen-runs/<card name>); `gen run -o` overrides it"),
        "row_group_events": Key(int, 200000, 1000, 1e8, "", "events per Parquet row group"),
    },
}


@dataclass(frozen=True)
class RunConfig:
    """A validated card. Energies in GeV; angles in degrees as written."""

    source: str
    text: str
    model: str
    incoming: tuple[Species, Species]
    outgoing: tuple[Species, ...]
    collider: dict[str, Any]
    parameters: dict[str, Any]
    masses: dict[int, float]  # by |PDG id|: a particle and its antiparticle
    widths: dict[int, float]
    cuts: dict[str, Any]
    partons: dict[str, Any]
    scales: dict[str, Any]
    decays: dict[str, Any]
    integration: dict[str, Any]
    sampling: dict[str, Any]
    output: dict[str, Any]

    def with_overrides(self, *, events: int | None = None, seed: int | None = None,
                       folder: str | None = None) -> "RunConfig":
        """A copy with command-line overrides applied (validated as the card keys are)."""
        sampling = dict(self.sampling)
        output = dict(self.output)
        if events is not None:
            _check_value(self.source, "sampling.events", events, SPEC["sampling"]["events"])
            sampling["events"] = events
        if seed is not None:
            _check_value(self.source, "sampling.seed", seed, SPEC["sampling"]["seed"])
            sampling["seed"] = seed
        if folder is not None:
            output["folder"] = folder
        return RunConfig(**{**self.__dict__, "sampling": sampling, "output": output})


def _type_name(kind) -> str:
    kinds = kind if isinstance(kind, tuple) else (kind,)
    names = {int: "an integer", float: "a number", str: "a string", list: "an array", dict: "a table", bool: "true/false"}
    if set(kinds) == {int, float}:
        return "a number"
    return " or ".join(names.get(k, k.__name__) for k in kinds)


def _check_value(source: str, path: str, value: Any, key: Key) -> Any:
    kinds = key.kind if isinstance(key.kind, tuple) else (key.kind,)
    if isinstance(value, bool) or not isinstance(value, kinds):
        raise CardError(source, path, f"expected {_type_name(key.kind)}, found {value!r} ({type(value).__name__})")
    if key.choices and value not in key.choices:
        raise CardError(source, path, f"{value!r} is not one of {', '.join(map(repr, key.choices))}"
                        + close_matches(str(value), key.choices))
    if isinstance(value, (int, float)):
        if isinstance(value, float) and math.isnan(value):
            raise CardError(source, path, "found nan; expected a number")
        if key.lo is not None and value < key.lo:
            raise CardError(source, path, f"{value!r} is below the smallest accepted value {key.lo:g}{(' ' + key.unit) if key.unit else ''}")
        if key.hi is not None and value > key.hi:
            raise CardError(source, path, f"{value!r} is above the largest accepted value {key.hi:g}{(' ' + key.unit) if key.unit else ''}")
    return value


def _section(source: str, doc: dict, name: str) -> dict[str, Any]:
    raw = doc.get(name, {})
    if not isinstance(raw, dict):
        raise CardError(source, name, f"expected a table [{name}], found {raw!r}")
    spec = SPEC[name]
    out: dict[str, Any] = {}
    for k, v in raw.items():
        if k not in spec:
            raise CardError(source, f"{name}.{k}", "unknown key" + close_matches(k, spec)
                            + "; accepted keys: " + ", ".join(spec))
        out[k] = _check_value(source, f"{name}.{k}", v, spec[k])
    for k, key in spec.items():
        if k not in out:
            if key.required:
                raise CardError(source, f"{name}.{k}", f"missing; required ({key.doc})")
            if key.default is not None:
                out[k] = key.default
    return out


def _particles(source: str, path: str, value: list, n: int | None) -> tuple[Species, ...]:
    if n is not None and len(value) != n:
        raise CardError(source, path, f"expected {n} particles, found {len(value)}")
    return tuple(lookup(tok, source, f"{path}[{i}]") for i, tok in enumerate(value))


def _parameters(source: str, model_name: str, raw: Any):
    if not isinstance(raw, dict):
        raise CardError(source, "parameters", f"expected a table [parameters], found {raw!r}")
    model = MODELS[model_name]
    params: dict[str, Any] = {}
    masses: dict[int, float] = {}
    widths: dict[int, float] = {}
    for k, v in raw.items():
        if k in ("masses", "widths"):
            if not isinstance(v, dict):
                raise CardError(source, f"parameters.{k}", f"expected a table of particle = value in GeV, found {v!r}")
            target = masses if k == "masses" else widths
            for name, val in v.items():
                sp = lookup(name, source, f"parameters.{k}.{name}")
                _check_value(source, f"parameters.{k}.{name}", val, Key(_NUM, lo=0.0, unit="GeV"))
                target[abs(sp.pdg)] = float(val)
            continue
        if k not in model.params:
            raise CardError(source, f"parameters.{k}", f"unknown parameter of model {model_name!r}"
                            + close_matches(k, list(model.params) + ["masses", "widths"])
                            + "; accepted: " + ", ".join(list(model.params) + ["masses", "widths"]))
        p = model.params[k]
        kind = str if p.choices else _NUM
        params[k] = _check_value(source, f"parameters.{k}", v, Key(kind, lo=p.lo, hi=p.hi, unit=p.unit, choices=p.choices))
    return params, masses, widths


def parse_card(text: str, source: str = "<card>") -> RunConfig:
    """Validate card text (TOML) and return its RunConfig, or raise CardError."""
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise CardError(source, "", f"not valid TOML: {exc}") from None
    sections = list(SPEC) + ["parameters", "decays"]
    for k in doc:
        if k not in sections:
            raise CardError(source, k, "unknown section" + close_matches(k, sections)
                            + "; accepted sections: " + ", ".join(sections))
    proc = _section(source, doc, "process")
    at_rest = isinstance(proc["incoming"], list) and len(proc["incoming"]) == 1
    incoming = _particles(source, "process.incoming", proc["incoming"], 1 if at_rest else 2)
    outgoing = _particles(source, "process.outgoing", proc["outgoing"], None)
    model = MODELS[proc["model"]]
    hadrons = [p.is_hadron for p in incoming]
    if at_rest and any(hadrons):
        raise CardError(source, "process.incoming", "a hadron does not decay in gen; give two hadron beams")
    if any(hadrons) and not all(hadrons):
        raise CardError(source, "process.incoming", "give two hadrons (p, pbar) or two particles; lepton-hadron "
                        "collisions are not supported")
    if all(hadrons):
        _check_hadron_process(source, model, incoming, outgoing, doc)
    else:
        for p in incoming + outgoing:
            if p.is_group:
                raise CardError(source, "process.outgoing", f"the group {p.name!r} needs hadron beams; name the particles")
        for sec in ("partons", "scales"):
            if sec in doc:
                raise CardError(source, sec, f"[{sec}] applies to hadron beams (p, pbar) only")
        if len(outgoing) not in (2, 3):
            raise CardError(source, "process.outgoing", f"expected 2 or 3 particles, found {len(outgoing)}")
        found = find_process(model, tuple(p.name for p in incoming), tuple(p.name for p in outgoing))
        if found is None:
            listing = "; ".join(s.label for s in model.processes)
            raise CardError(source, "process", f"model {model.name!r} has no process "
                            f"{' '.join(p.name for p in incoming)} -> {' '.join(p.name for p in outgoing)}; "
                            f"it has: {listing}")
    collider = _section(source, doc, "collider")
    given = [k for k in SPEC["collider"] if k in collider]
    if at_rest and given:
        raise CardError(source, f"collider.{given[0]}", "one incoming particle decays at rest; leave out [collider]")
    if len(given) != 1 and not at_rest:
        raise CardError(source, "collider", "give exactly one of sqrt_s, beam_energies, beam_energy; found "
                        + (", ".join(given) if given else "none"))
    if "beam_energies" in collider:
        be = collider["beam_energies"]
        if len(be) != 2 or any(isinstance(e, bool) or not isinstance(e, _NUM) or e <= 0 for e in be):
            raise CardError(source, "collider.beam_energies", f"expected two positive energies in GeV, found {be!r}")
    params, masses, widths = _parameters(source, model.name, doc.get("parameters", {}))
    cuts = _section(source, doc, "cuts")
    if "particles" in cuts:
        names = [p.name for p in _particles(source, "cuts.particles", cuts["particles"], None)]
        for i, name in enumerate(names):
            if name not in [p.name for p in outgoing]:
                raise CardError(source, f"cuts.particles[{i}]", f"{name!r} is not an outgoing particle of the process; "
                                "outgoing: " + ", ".join(p.name for p in outgoing))
        cuts["particles"] = names
    for lo, hi in (("theta_min_deg", "theta_max_deg"), ("energy_min", "energy_max"),
                   ("pt_min", "pt_max"), ("mass_min", "mass_max")):
        if cuts[lo] >= cuts[hi]:
            raise CardError(source, f"cuts.{lo}", f"{cuts[lo]!r} is not below cuts.{hi} = {cuts[hi]!r}")
    return RunConfig(
        source=source, text=text, model=model.name, incoming=incoming, outgoing=outgoing,
        collider=collider, parameters=params, masses=masses, widths=widths, cuts=cuts,
        partons=_section(source, doc, "partons"), scales=_scales(source, _section(source, doc, "scales")),
        decays=parse_decays(source, doc.get("decays")),
        integration=_section(source, doc, "integration"), sampling=_section(source, doc, "sampling"),
        output=_section(source, doc, "output"))


SCALE_CHOICES = ("auto", "sqrt_shat", "half_ht", "pt")


def _scales(source: str, sc: dict) -> dict:
    for k in ("renormalization", "factorization"):
        v = sc[k]
        if isinstance(v, str) and v not in SCALE_CHOICES:
            raise CardError(source, f"scales.{k}", f"{v!r} is not one of {', '.join(map(repr, SCALE_CHOICES))} "
                            "or a number in GeV" + close_matches(v, SCALE_CHOICES))
        if not isinstance(v, str) and not v > 0:
            raise CardError(source, f"scales.{k}", f"a fixed scale must be positive, found {v!r} GeV")
    return sc


def _check_hadron_process(source, model, incoming, outgoing, doc) -> None:
    if len(outgoing) not in (1, 2):
        raise CardError(source, "process.outgoing", f"with hadron beams expected 1 or 2 particles, found {len(outgoing)}")
    if "beam_energy" in doc.get("collider", {}):
        raise CardError(source, "collider.beam_energy", "hadron beams collide head-on: give sqrt_s or beam_energies")
    subs = find_subprocesses(model, tuple(p.name for p in incoming), tuple(outgoing))
    if not subs:
        partonic = sorted({s.label for s in model.processes if len(s.outgoing) == len(outgoing)
                           and all(p in HADRON_PARTONS["p"] for p in s.incoming)})
        raise CardError(source, "process", f"model {model.name!r} has no parton process for "
                        f"{' '.join(p.name for p in incoming)} -> {' '.join(p.name for p in outgoing)}; its parton "
                        "processes: " + "; ".join(partonic[:40]) + (" ..." if len(partonic) > 40 else ""))


def load_card(path: str | Path) -> RunConfig:
    """Read and validate a card file."""
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise CardError(str(p), "", "no such card file") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise CardError(str(p), "", f"cannot read the card: {exc}") from None
    return parse_card(text, str(p))


def reference_markdown() -> str:
    """The card reference as a Markdown table, made from SPEC and the models' parameters."""
    lines = ["| key | type | default | range / choices | unit | meaning |", "|---|---|---|---|---|---|"]
    for sec, keys in SPEC.items():
        for k, key in keys.items():
            rng = ", ".join(key.choices) if key.choices else (
                "" if key.lo is None and key.hi is None else f"{_fmt(key.lo)} .. {_fmt(key.hi)}")
            default = "required" if key.required else ("" if key.default is None else _fmt(key.default))
            lines.append(f"| `{sec}.{k}` | {_type_name(key.kind)} | {default} | {rng} | {key.unit} | {key.doc} |")
    for name, model in MODELS.items():
        for k, p in model.params.items():
            rng = ", ".join(p.choices) if p.choices else f"{_fmt(p.lo)} .. {_fmt(p.hi)}"
            default = "PDG" if p.default is None else _fmt(p.default)
            lines.append(f"| `parameters.{k}` ({name}) | {'a string' if p.choices else 'a number'} | {default} | {rng} | {p.unit} | {p.doc} |")
    lines.append("| `parameters.masses.<particle>` | a number | PDG | 0 .. | GeV | mass of a particle and its antiparticle |")
    lines.append("| `parameters.widths.<particle>` | a number | PDG | 0 .. | GeV | width of a particle and its antiparticle |")
    lines.append("| `decays.<particle>.into` | an array | | two particles | | the decay of a particle the process makes (or a decay product makes) |")
    lines.append("| `decays.<particle>.branching_ratio` | a number | tree-level partial widths | 0 .. 1 | | its branching ratio |")
    lines.append("| `decays.<particle>.window` | a number | 10 | 0 .. | widths | half-width of the Breit-Wigner mass window, in widths |")
    return "\n".join(lines) + "\n"


def _fmt(v) -> str:
    if v is None:
        return ""
    if isinstance(v, float) and math.isinf(v):
        return "inf"
    if isinstance(v, float):
        return f"{v:g}"
    return str(v)
