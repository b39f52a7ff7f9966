"""Run cards: TOML in, a validated and resolved `RunConfig` out, in one pass, in one place.

Every key a card may hold is described once, as a `gen.keys.Key` in `SPEC` (and the models'
parameters in their own modules); every rule that relates keys to each other or to the physics
(beams above threshold, the cuts a process needs, decays that conserve charge, colour and lepton
number, keys that would have no effect) is one entry of `RULES`, checked in order. The card
reference in the README is made from both (`reference_markdown`). Errors name the card file and
the key path, say what was found and what is accepted, and suggest the closest key, the section
a misplaced key belongs to, or the model that has the process.

What the rules establish (the matched process, resolved parameters and masses, beam momenta, the
parton-density set, the decay steps) is kept in `RunConfig.resolved`, so that nothing downstream
derives it again. Checks that need the integrand itself (cuts that empty the phase space, an
integrand that vanishes) are made where the phase space is built.
"""

from __future__ import annotations

import math
import tomllib
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

from .errors import CardError, close_matches
from .keys import NUMBER, Key, type_name
from .physics import pdf as _pdf
from .physics import widths as _widths
from .physics.matrix import MODELS, Ordering, ProcessSpec, Subprocess, find_process, find_subprocesses
from .physics.particles import HADRON_PARTONS, Species, lookup, species

__all__ = ["RunConfig", "Resolved", "DecayStep", "load_card", "parse_card", "parse_doc", "SPEC", "RULES", "reference_markdown",
           "CARD_SCHEMA_VERSION", "SCALE_CHOICES"]

#: version of the card format (sections, keys and rules); written into every run record
CARD_SCHEMA_VERSION = "2.0"

SCALE_CHOICES = ("auto", "sqrt_shat", "half_ht", "pt", "boson_mt", "jets_pt_mean")

#: particles whose masses hadron collisions keep (partons, leptons and photons are massless there)
MASSIVE_IN_HADRON_COLLISIONS = ("t", "tbar", "W+", "W-", "Z", "H")
#: alpha_s at which automatic amplitudes of hadron collisions are built and checked; it runs per
#: event from there (`TreeAmplitude.squared`)
TREE_ALPHA_S_REFERENCE = 0.118

#: the card's sections and keys; [parameters] is described by the chosen model, [decays] by DECAY_KEYS
SPEC: dict[str, dict[str, Key]] = {
    "process": {
        "model": Key(str, required=True, choices=tuple(MODELS), doc="model of the process library"),
        "incoming": Key(list, required=True, doc="two incoming particles (names or PDG ids), or two hadrons (p, pbar); the "
                        "first moves along +z; or one particle, which decays at rest (no [collider]; the integral is its partial width)"),
        "outgoing": Key(list, required=True, doc="two or three outgoing particles (names or PDG ids), two to six with "
                        "a model of automatic amplitudes (standard, standard-gluon-higgs, qcd-tree, qed-tree, scalar-tree); with hadron beams one or two "
                        "(two or three with automatic amplitudes), and group names (jet, quark, antiquark, l-, l+, nu, nubar) stand for any of their members"),
        "helicities": Key(str, "sum", doc="automatic amplitudes: sum over helicities at every point, or sample one "
                          "helicity configuration per point (cheaper per point, larger variance)", choices=("sum", "sample")),
        "colours": Key(str, "auto", doc="automatic amplitudes: exact colour sum, one sampled colour assignment per point, "
                       "or auto (the sum for few coloured particles, sampling for many)", choices=("auto", "sum", "sample")),
        "decay_spins": Key(str, "auto", doc="the [decays]: correlated (production and decays as one amplitude, the "
                           "decaying particles' helicities summed coherently: automatic amplitudes at fixed beams), "
                           "isotropic (each decay flat in its rest frame, any model), or auto (correlated where it can be)",
                           choices=("auto", "correlated", "isotropic")),
    },
    "collider": {
        "sqrt_s": Key(NUMBER, lo=0.0, hi=1e9, lo_open=True, unit="GeV", doc="head-on beams of equal energy sqrt_s/2 (laboratory = centre-of-mass frame)"),
        "beam_energies": Key(list, unit="GeV", doc="[E1, E2]: head-on beams of these energies, beam 1 along +z"),
        "beam_energy": Key(NUMBER, lo=0.0, hi=1e9, lo_open=True, unit="GeV", doc="fixed target: beam 1 of this energy along +z onto particle 2 at rest"),
    },
    "cuts": {
        "particles": Key(list, doc="outgoing particles the cuts apply to (default: all outgoing)"),
        "theta_min_deg": Key(NUMBER, 0.0, 0.0, 180.0, "deg", "smallest polar angle to +z in the laboratory, each particle"),
        "theta_max_deg": Key(NUMBER, 180.0, 0.0, 180.0, "deg", "largest polar angle to +z in the laboratory, each particle"),
        "energy_min": Key(NUMBER, 0.0, 0.0, 1e9, "GeV", "smallest laboratory energy, each particle"),
        "energy_max": Key(NUMBER, math.inf, 0.0, 1e9, "GeV", "largest laboratory energy, each particle", allow_inf=True),
        "pt_min": Key(NUMBER, 0.0, 0.0, 1e9, "GeV", "smallest transverse momentum, each particle"),
        "pt_max": Key(NUMBER, math.inf, 0.0, 1e9, "GeV", "largest transverse momentum, each particle", allow_inf=True),
        "mass_min": Key(NUMBER, 0.0, 0.0, 1e9, "GeV", "smallest invariant mass of the selected particles together"),
        "mass_max": Key(NUMBER, math.inf, 0.0, 1e9, "GeV", "largest invariant mass of the selected particles together",
                        allow_inf=True),
        "pair_mass_min": Key(NUMBER, 0.0, 0.0, 1e9, "GeV", "smallest invariant mass of every pair of selected particles"),
        "eta_max": Key(NUMBER, math.inf, 0.0, 1e3, "", "largest |pseudorapidity| in the laboratory, each particle",
                       allow_inf=True, lo_open=True),
        "rapidity_max": Key(NUMBER, math.inf, 0.0, 1e3, "", "largest |rapidity| in the laboratory, each particle",
                            allow_inf=True, lo_open=True),
        "delta_r_min": Key(NUMBER, 0.0, 0.0, 100.0, "", "smallest Delta R = sqrt(Delta eta^2 + Delta phi^2) of every pair of selected particles"),
        "sum_pt_min": Key(NUMBER, 0.0, 0.0, 1e9, "GeV", "smallest transverse momentum of the selected particles "
                          "together (of the neutrinos: the missing transverse momentum)"),
        "sets": Key(list, doc="further sets of cuts, [[cuts.sets]] tables, each with its own particles (required) and "
                    "any keys of [cuts]: an event passes [cuts] and every set (jets, leptons, photons or missing "
                    "momentum cut apart; a delta_r_min on jets and leptons together separates them)"),
    },
    "partons": {
        "set": Key(str, _pdf.DEFAULT_SET, doc="parton-density set: a name searched in LHAPDF_DATA_PATH and the sets shipped "
                   "with gen, or a set's folder (default: the shipped benchmark set, not a fit to data)"),
        "member": Key(int, 0, 0, 10000, "", "member of the set"),
        "alpha_s": Key(str, "set", doc="running coupling: from the set's metadata, or run at one or two loops from alpha_s_mz",
                       choices=("set", "one_loop", "two_loop")),
        "alpha_s_mz": Key(NUMBER, 0.118, 0.05, 0.3, "", "alpha_s(m_Z) for alpha_s = one_loop or two_loop"),
    },
    "scales": {
        "renormalization": Key((str, int, float), "auto", unit="GeV", doc="scale of alpha_s: sqrt_shat, half_ht (half "
                               "the scalar sum of the outgoing transverse masses), pt (of the first outgoing particle), boson_mt "
                               "(the transverse mass sqrt(m^2 + p_T^2) of the colourless outgoing particles together: a "
                               "W, Z or H, or the lepton pair), jets_pt_mean (the geometric mean of the p_T of the coloured "
                               "outgoing particles, the jets at leading order), a "
                               "number in GeV within the parton set's Q range, or auto: half_ht when coloured or massive "
                               "particles come out, else sqrt_shat; dynamic scales are floored at 1 GeV"),
        "factorization": Key((str, int, float), "auto", unit="GeV", doc="scale of the parton densities (same choices)"),
        "factor": Key(NUMBER, 1.0, 0.01, 100.0, "", "multiplies both scales (vary it to estimate the scale uncertainty)"),
    },
    "integration": {
        "warmup_iterations": Key(int, 5, 0, 1000, "", "vegas iterations that adapt the grid and are discarded"),
        "iterations": Key(int, 10, 1, 1000, "", "vegas iterations whose weighted average is the cross-section"),
        "points_per_iteration": Key(int, 20000, 100, 1e9, "", "integrand evaluations per iteration"),
        "consistency_min_q": Key(NUMBER, 0.01, 0.0, 1.0, "", "warn when the iterations' chi-square Q falls below this"),
    },
    "sampling": {
        "events": Key(int, 10000, 0, 1e12, "", "unweighted events to write"),
        "weighted_events": Key(int, 10000, 0, 1e12, "", "sampled points to write as weighted events (0: no weighted file)"),
        "seed": Key(int, 1, 0, 2**63 - 1, "", "seed of the run's random streams"),
        "calibration_points": Key(int, 100000, 1000, 1e9, "", "points drawn from the adapted map to find the maximum weight"),
        "overweight_share": Key(NUMBER, 1e-4, 0.0, 0.01, "", "share of the calibration sample's cross-section that "
                                "weights above the maximum weight may carry (the maximum weight is the lowest such "
                                "bound, so one rare large weight does not set it; 0: the largest weight)"),
        "chunk": Key(int, 50000, 1000, 1e7, "", "points handled per vectorized step"),
    },
    "output": {
        "folder": Key(str, doc="run folder (default: gen-runs/<card name>); `gen run -o` overrides it"),
        "row_group_events": Key(int, 200000, 1000, 1e8, "", "events per Parquet row group"),
        "compression": Key(str, "snappy", doc="Parquet compression: snappy (fastest to write), zstd (files about "
                           "half the size, writing about a quarter slower) or none", choices=("snappy", "zstd", "none")),
    },
}

#: [parameters.masses] and [parameters.widths]: particle = value
PARTICLE_VALUE = Key(NUMBER, None, 0.0, 1e5, "GeV", "", default_doc="PDG")

#: the keys of each [decays.<particle>] table
DECAY_KEYS: dict[str, Key] = {
    "into": Key(list, required=True, doc="the two particles it decays into"),
    "branching_ratio": Key(NUMBER, None, 0.0, 1.0, "", "its branching ratio", lo_open=True,
                           default_doc="tree-level widths (Z, W, t); SM table (H)"),
    "window": Key(NUMBER, 10.0, 0.0, 1e6, "widths", "half-width of the Breit-Wigner mass window, in widths", lo_open=True),
}

#: every section a card may have, in the order of the reference
SECTIONS = ("process", "collider", "parameters", "cuts", "partons", "scales", "decays", "integration", "sampling",
            "output")


# --- the validated card ---------------------------------------------------------------------------

@dataclass(frozen=True)
class DecayStep:
    """One decay of an event's particle list: the parent's index, its two products' indices, the
    parent's nominal mass and width (GeV), the branching ratio and where it came from, the window."""

    parent: int
    children: tuple[int, int]
    particle: str
    products: tuple[str, str]
    mass: float
    width: float
    branching_ratio: float
    branching_ratio_source: str
    window: float


@dataclass(frozen=True)
class Resolved:
    """What the rules established, so that nothing downstream derives it again."""

    #: the model's parameters with every default filled in
    parameters: dict[str, Any]
    #: the particles of an event in record order: the production's (incoming, outgoing), then decay products
    names: tuple[str, ...]
    #: nominal masses (GeV) of those particles
    masses: tuple[float, ...]
    #: fixed beams and decays at rest: the spec and the card's order in it
    ordering: Ordering | None = None
    #: hadron beams: every parton-level subprocess
    subprocesses: tuple[Subprocess, ...] = ()
    #: fixed beams: laboratory four-momenta (GeV) of the two beams; hadron beams: of the two hadrons
    beams: tuple[tuple[float, ...], tuple[float, ...]] | None = None
    #: the card key that sets the beam energies (for messages)
    beam_key: str = ""
    #: hadron beams, 2 -> 2: the range of s-hat (GeV^2) the masses and cuts allow
    shat_range: tuple[float, float] | None = None
    #: hadron beams: the parton-density set's checked metadata
    parton_set: _pdf.SetHeader | None = None
    decays: tuple[DecayStep, ...] = ()

    @property
    def n_production(self) -> int:
        return len(self.names) - 2 * len(self.decays)

    @property
    def branching_ratio(self) -> float:
        return math.prod(st.branching_ratio for st in self.decays)


@dataclass(frozen=True)
class RunConfig:
    """A validated card. Energies in GeV; angles in degrees as written."""

    source: str
    text: str
    model: str
    incoming: tuple[Species, ...]
    outgoing: tuple[Species, ...]
    collider: dict[str, Any]
    parameters: dict[str, Any]  # as the card gives them
    masses: dict[int, float]  # [parameters.masses] by |PDG id|: a particle and its antiparticle
    widths: dict[int, float]  # [parameters.widths] by |PDG id|
    cuts: dict[str, Any]
    partons: dict[str, Any]
    scales: dict[str, Any]
    decays: dict[str, dict[str, Any]]  # [decays.<particle>] as the card gives them
    integration: dict[str, Any]
    sampling: dict[str, Any]
    output: dict[str, Any]
    resolved: Resolved = field(repr=False, compare=False, default=None)
    #: [process] options of the automatic amplitudes: helicities, colours
    process_options: dict[str, Any] = field(default_factory=dict)

    @property
    def at_rest(self) -> bool:
        return len(self.incoming) == 1

    @property
    def hadron_beams(self) -> bool:
        return self.incoming[0].is_hadron

    @property
    def label(self) -> str:
        return f"{' '.join(p.name for p in self.incoming)} -> {' '.join(p.name for p in self.outgoing)}"

    def with_overrides(self, *, events: int | None = None, seed: int | None = None,
                       folder: str | None = None) -> "RunConfig":
        """A copy with command-line overrides applied (validated as the card keys are)."""
        sampling = dict(self.sampling)
        output = dict(self.output)
        if events is not None:
            sampling["events"] = SPEC["sampling"]["events"].check(self.source, "sampling.events (--events)", events)
        if seed is not None:
            sampling["seed"] = SPEC["sampling"]["seed"].check(self.source, "sampling.seed (--seed)", seed)
        if folder is not None:
            output["folder"] = folder
        _something_to_write(self.source, sampling)
        return replace(self, sampling=sampling, output=output)


# --- rules --------------------------------------------------------------------------------------

class _Draft:
    """The card while the rules run: sections as validated so far and what the rules resolve."""

    def __init__(self, source: str, text: str, doc: dict):
        self.source, self.text, self.doc = source, text, doc
        self.sections: dict[str, dict[str, Any]] = {}
        self.model = None
        self.incoming: tuple[Species, ...] = ()
        self.outgoing: tuple[Species, ...] = ()
        self.given: dict[str, Any] = {}
        self.mass_overrides: dict[int, float] = {}
        self.width_overrides: dict[int, float] = {}
        self.mass_keys: dict[int, str] = {}
        self.width_keys: dict[int, str] = {}
        self.decays: dict[str, dict[str, Any]] = {}
        self.params: dict[str, Any] = {}
        self.ordering: Ordering | None = None
        self.subprocesses: tuple[Subprocess, ...] = ()
        self.masses: list[float] = []
        self.names: list[str] = []
        self.beams = None
        self.beam_key = ""
        self.shat_range = None
        self.parton_set = None
        self.steps: list[DecayStep] = []
        self.decay_spins = "isotropic"
        #: the [[cuts.sets]] tables once validated (see `cut_sets`)
        self.cut_tables: list[dict] | None = None

    def error(self, key: str, message: str) -> CardError:
        return CardError(self.source, key, message)

    @property
    def at_rest(self) -> bool:
        return len(self.incoming) == 1

    @property
    def hadrons(self) -> bool:
        return bool(self.incoming) and self.incoming[0].is_hadron

    @property
    def label(self) -> str:
        return f"{' '.join(p.name for p in self.incoming)} -> {' '.join(p.name for p in self.outgoing)}"


@dataclass(frozen=True)
class Rule:
    """A rule relating keys to each other or to the physics; `doc` goes into the card reference."""

    doc: str
    check: Callable[[_Draft], None]


RULES: list[Rule] = []


def _rule(doc: str):
    def register(fn):
        RULES.append(Rule(" ".join(doc.split()), fn))
        return fn

    return register


@_rule("process.incoming holds two particles, two hadrons (p, pbar), or one particle that decays at rest; "
       "process.outgoing two or three particles, or one or two particles or groups with hadron beams; the "
       "automatic amplitudes take two to six outgoing particles at fixed beams and two or three particles or "
       "groups with hadron beams.")
def _particles(d: _Draft) -> None:
    proc = d.sections["process"]
    d.model = MODELS[proc["model"]]
    if not 1 <= len(proc["incoming"]) <= 2:
        raise d.error("process.incoming", f"expected one or two particles, found {len(proc['incoming'])}")
    d.incoming = tuple(lookup(tok, d.source, f"process.incoming[{i}]") for i, tok in enumerate(proc["incoming"]))
    d.outgoing = tuple(lookup(tok, d.source, f"process.outgoing[{i}]") for i, tok in enumerate(proc["outgoing"]))
    hadrons = [p.is_hadron for p in d.incoming]
    if d.at_rest and any(hadrons):
        raise d.error("process.incoming", "a hadron does not decay in gen; give two hadron beams")
    if any(hadrons) and not all(hadrons):
        raise d.error("process.incoming", "give two hadrons (p, pbar) or two particles; lepton-hadron collisions are "
                      "not supported")
    automatic = d.model.automatic is not None
    for k in ("helicities", "colours"):
        if k in proc and k in d.doc.get("process", {}) and not automatic:
            raise d.error(f"process.{k}", f"applies to models of automatic amplitudes only (standard, standard-gluon-higgs, "
                          f"qcd-tree, qed-tree, scalar-tree); the {d.model.name} model's processes are hand-coded and summed exactly")
    if automatic and d.at_rest:
        raise d.error("process.incoming", f"the automatic amplitudes of the {d.model.name} model take two beams; "
                      "for decays at rest use the hand-coded models (qed, electroweak)")
    if d.hadrons:
        if automatic and not 2 <= len(d.outgoing) <= 3:
            raise d.error("process.outgoing", f"with hadron beams the automatic amplitudes take 2 or 3 outgoing "
                          f"particles or groups, found {len(d.outgoing)}")
        if not automatic and not 1 <= len(d.outgoing) <= 2:
            raise d.error("process.outgoing", f"with hadron beams expected 1 or 2 particles, found {len(d.outgoing)}")
        return
    for i, p in enumerate(d.incoming + d.outgoing):
        if p.is_group:
            where = f"process.incoming[{i}]" if i < len(d.incoming) else f"process.outgoing[{i - len(d.incoming)}]"
            raise d.error(where, f"the group {p.name!r} needs hadron beams (p, pbar); name the particles")
    if automatic:
        if not 2 <= len(d.outgoing) <= 6:
            raise d.error("process.outgoing", f"expected 2 to 6 particles, found {len(d.outgoing)}")
        return
    if len(d.outgoing) not in (2, 3):
        raise d.error("process.outgoing", f"expected 2 or 3 particles, found {len(d.outgoing)} (the automatic "
                      "amplitudes of process.model = \"standard\" take up to six)")


@_rule("[collider] gives exactly one of sqrt_s, beam_energies (two positive energies) and beam_energy (fixed "
       "target, not for hadron beams); a particle decaying at rest has no [collider].")
def _collider(d: _Draft) -> None:
    col = d.sections["collider"]
    given = [k for k in SPEC["collider"] if k in col]
    if d.at_rest:
        if given:
            raise d.error(f"collider.{given[0]}", "one incoming particle decays at rest; leave out [collider]")
        return
    if len(given) != 1:
        raise d.error("collider", "give exactly one of sqrt_s, beam_energies, beam_energy; found "
                      + (", ".join(given) if given else "none"))
    d.beam_key = f"collider.{given[0]}"
    if "beam_energies" in col:
        be = col["beam_energies"]
        energy = Key(NUMBER, lo=0.0, lo_open=True, hi=1e9, unit="GeV")
        if len(be) != 2:
            raise d.error("collider.beam_energies", f"expected two positive energies in GeV, found {be!r}")
        for i, e in enumerate(be):
            energy.check(d.source, f"collider.beam_energies[{i}]", e)
    if "beam_energy" in col and d.hadrons:
        raise d.error("collider.beam_energy", "hadron beams collide head-on: give sqrt_s or beam_energies")


@_rule("[partons] and [scales] apply to hadron beams only.")
def _hadron_sections(d: _Draft) -> None:
    if not d.hadrons:
        for sec in ("partons", "scales"):
            if sec in d.doc:
                raise d.error(sec, f"[{sec}] applies to hadron beams (p, pbar) only")


def _other_models(d: _Draft, has) -> str:
    others = [name for name, model in MODELS.items() if name != d.model.name and has(model)]
    if not others:
        return ""
    return f"; the {' and the '.join(repr(o) for o in others)} model{'s have' if len(others) > 1 else ' has'} it " \
           f"(set process.model = {others[0]!r})"


@_rule("The model has the process: at fixed beams in any order of the particles; with hadron beams at least one "
       "parton-level subprocess that the beams' partons start and the outgoing particles or groups fill.")
def _process_in_model(d: _Draft) -> None:
    names_in = tuple(p.name for p in d.incoming)
    names_out = tuple(p.name for p in d.outgoing)
    if d.model.automatic:
        # checked against the model's vertices once the parameters are known (the rule after [parameters])
        if d.hadrons:
            return
        spec = ProcessSpec(d.model.name, names_in, names_out, None,
                           f"automatic tree amplitude (off-shell recursion over the vertices of the model file "
                           f"{d.model.automatic}); identical outgoing particles counted once by the symmetry factor")
        d.ordering = Ordering(spec, tuple(range(len(names_in))), tuple(range(len(names_out))))
        return
    if d.hadrons:
        subs = find_subprocesses(d.model, names_in, d.outgoing)
        if not subs:
            hint = _other_models(d, lambda m: bool(find_subprocesses(m, names_in, d.outgoing)))
            partonic = sorted({s.label for s in d.model.processes if len(s.outgoing) == len(d.outgoing)
                               and all(p in HADRON_PARTONS["p"] for p in s.incoming)})
            hint += (f"; {d.model.name} has parton processes such as " + "; ".join(partonic[:8])
                     + (" ..." if len(partonic) > 8 else "") + " (`gen processes` lists them all)") if partonic \
                else f"; {d.model.name} has no parton processes with {len(d.outgoing)} outgoing particles"
            raise d.error("process", f"model {d.model.name!r} has no parton process for {d.label}" + hint)
        d.subprocesses = tuple(subs)
        return
    found = find_process(d.model, names_in, names_out)
    if found is None:
        hint = _other_models(d, lambda m: find_process(m, names_in, names_out) is not None)
        listed = [s.label for s in d.model.processes if (len(s.incoming) == 1) == d.at_rest
                  and not all(p in HADRON_PARTONS["p"] for p in s.incoming)]
        hint += f"; {d.model.name} has: " + "; ".join(listed) if listed else f"; {d.model.name} has no such processes"
        raise d.error("process", f"model {d.model.name!r} has no process {d.label}" + hint)
    d.ordering = found


@_rule("[parameters] holds the chosen model's parameters (each with the effect its description states; a "
       "parameter the model's other choices leave unused is refused), and the tables masses and widths of "
       "particle = value in GeV; alpha_s runs in hadron collisions and is set under [partons] instead.")
def _parameters(d: _Draft) -> None:
    raw = d.doc.get("parameters", {})
    if not isinstance(raw, dict):
        raise d.error("parameters", f"expected a table [parameters], found {raw!r}")
    model = d.model
    accepted = list(model.params) + ["masses", "widths"]
    for k, v in raw.items():
        if k in ("masses", "widths"):
            if not isinstance(v, dict):
                raise d.error(f"parameters.{k}", f"expected a table of particle = value in GeV, found {v!r}")
            target, keys = (d.mass_overrides, d.mass_keys) if k == "masses" else (d.width_overrides, d.width_keys)
            for name, val in v.items():
                path = f"parameters.{k}.{name}"
                sp = lookup(name, d.source, path)
                if sp.is_group:
                    raise d.error(path, f"{sp.name!r} is a group; give the {k} of particles")
                target[abs(sp.pdg)] = float(PARTICLE_VALUE.check(d.source, path, val))
                keys[abs(sp.pdg)] = path
            continue
        if k not in model.params:
            elsewhere = [m for m, mod in MODELS.items() if k in mod.params]
            where = f"; it is a parameter of the {' and '.join(repr(m) for m in elsewhere)} model" if elsewhere else ""
            raise d.error(f"parameters.{k}", f"unknown parameter of model {model.name!r}" + close_matches(k, accepted)
                          + where + "; accepted: " + ", ".join(accepted))
        d.given[k] = model.params[k].check(d.source, f"parameters.{k}", v)
    for k, why in model.inapplicable(d.given).items():
        raise d.error(f"parameters.{k}", f"has no effect here: {why}")
    if d.hadrons and "alpha_s" in d.given:
        raise d.error("parameters.alpha_s", "alpha_s runs with the scale in hadron collisions; set partons.alpha_s "
                      "(set, one_loop, two_loop) and partons.alpha_s_mz instead")
    for name in model.massless:
        for pdg in (abs(species(name).pdg),):
            if pdg in d.mass_overrides:
                raise d.error(d.mass_keys[pdg], f"the {model.name} model treats {name} as massless (in its amplitudes and "
                              "kinematics alike); its massive particles are " + ", ".join(
                                  sorted(p for p in ("tau-", "b", "t") if p not in model.massless)))
    for which, governed, given, keys in (("mass", model.mass_params, d.mass_overrides, d.mass_keys),
                                         ("width", model.width_params, d.width_overrides, d.width_keys)):
        for name, param in governed.items():
            pdg = abs(species(name).pdg)
            if pdg in given:
                raise d.error(keys[pdg], f"the {model.name} model sets this {which} from its parameters; set "
                              f"parameters.{param} instead")
    d.params = dict(model.resolve(d.given))
    if d.hadrons:
        d.params.pop("alpha_s", None)


@_rule("With a model of automatic amplitudes the process conserves electric charge, quark number, the lepton number "
       "of each generation and colour, and the model's vertices join its particles at tree level; with hadron "
       "beams at least one parton process of the beams' partons fills the outgoing particles or groups, and every "
       "massless coloured particle or photon of each has the cut that keeps it away from its singularities.")
def _tree_process(d: _Draft) -> None:
    if not d.model.automatic:
        return
    from .physics import tree

    masses = {lookup(pdg).name: m for pdg, m in d.mass_overrides.items()}
    names_in, names_out = [p.name for p in d.incoming], [p.name for p in d.outgoing]
    if d.hadrons:
        _tree_subprocesses(d, tree, masses)
        return
    why = tree.allowed(d.model.automatic, names_in, names_out, d.params, masses)
    if why:
        raise d.error("process", f"the {d.model.name} model has no process {d.label}: {why}")
    _infrared(d, tree.singular_lines(d.model.automatic, names_in, names_out, d.params, masses))


def _tree_subprocesses(d: _Draft, tree, masses) -> None:
    """The parton processes of an automatic model that fill the card's slots at hadron beams."""
    params = dict(d.params, alpha_s=TREE_ALPHA_S_REFERENCE)
    masses = dict(tree.HADRON_MASSLESS, **masses)
    first: dict[str, int] = {}
    same = [first.setdefault(p.name, k) for k, p in enumerate(d.outgoing)]
    found = tree.hadron_subprocesses(d.model.automatic, [p.name for p in d.incoming],
                                     [p.members or (p.name,) for p in d.outgoing], same, params, masses)
    if not found:
        raise d.error("process", f"the {d.model.name} model has no parton process for {d.label} at tree level: no "
                      "partons of the beams (g, u, d, s, c, b and antiquarks) make these particles while conserving "
                      "charge, quark and lepton numbers and colour")
    source = (f"automatic tree amplitude (off-shell recursion over the vertices of the model file "
              f"{d.model.automatic}); identical outgoing particles counted once by the symmetry factor")
    n = len(d.outgoing)
    d.subprocesses = tuple(Subprocess(ProcessSpec(d.model.name, ab, outs, None, source), (0, 1), tuple(range(n)),
                                      partons=ab, outgoing=outs) for ab, outs in found)
    seen = set()
    for ab, outs in found:
        key = (tuple(sorted(ab)), outs)
        if key not in seen:
            seen.add(key)
            _infrared(d, tree.singular_lines(d.model.automatic, ab, outs, params, masses))


def cut_sets(d: _Draft) -> list[dict]:
    """[cuts] and each [[cuts.sets]] table, validated like [cuts] (defaults filled in, particle
    names resolved); the sets are stored back into cuts.sets in that form."""
    cuts = d.sections["cuts"]
    raw = cuts.get("sets", [])
    if d.cut_tables is None:
        spec = {k: v for k, v in SPEC["cuts"].items() if k != "sets"}
        spec["particles"] = Key(list, required=True, doc=SPEC["cuts"]["particles"].doc)
        done = []
        for i, table in enumerate(raw):
            path = f"cuts.sets[{i}]"
            if not isinstance(table, dict):
                raise d.error(path, f"expected a table of cuts with its particles, found {table!r}")
            one = _keys_of(d, path, table, spec)
            _check_cut_table(d, one, path)
            done.append(one)
        if raw:
            cuts["sets"] = done
        d.cut_tables = done
    return [cuts] + d.cut_tables


def _infrared(d: _Draft, lines) -> None:
    """The cuts that keep an automatic process away from its soft and collinear singularities:
    each singular region needs a cut of [cuts] or of one set that covers all its particles."""
    outgoing = [p.name for p in d.outgoing]
    n_in = len(d.incoming)
    tables = cut_sets(d)
    for kind, legs in lines:
        names = [outgoing[i - n_in] for i in legs if i >= n_in]
        if not any(_covers(d, cuts, kind, names, outgoing) for cuts in tables):
            _missing_cut(d, kind, names)


def _covers(d: _Draft, cuts: dict, kind: str, names: list[str], outgoing: list[str]) -> bool:
    chosen = set(cuts.get("particles", outgoing))
    if not all(n in chosen for n in names):
        return False
    if kind == "final":
        # a mass cut on exactly these two bounds their pair mass too
        pair_only = cuts["mass_min"] > 0.0 and sorted(cuts.get("particles", outgoing)) == sorted(names)
        return cuts["pair_mass_min"] > 0.0 or cuts["delta_r_min"] > 0.0 or pair_only
    if kind == "initial":
        return cuts["pt_min"] > 0.0 or (cuts["theta_min_deg"] > 0.0 and cuts["theta_max_deg"] < 180.0)
    # a pair-mass cut keeps a soft particle away too, when it pairs with a massless one
    paired = cuts["pair_mass_min"] > 0.0 and sum(1 for n in outgoing if n in chosen and _mass(d, n) == 0.0) >= 2
    return cuts["pt_min"] > 0.0 or cuts["energy_min"] > 0.0 or paired


def _missing_cut(d: _Draft, kind: str, names: list[str]) -> None:
    where = " ([cuts] or a [[cuts.sets]] table that selects them)"
    if kind == "final":
        raise d.error("cuts.pair_mass_min", f"{d.label} is singular where the pair mass of {' and '.join(names)} goes "
                      "to zero (a massless line joins them: collinear or soft); set cuts.pair_mass_min (or "
                      f"cuts.delta_r_min) on them{where}, for example pair_mass_min = 10")
    if kind == "initial":
        raise d.error("cuts.pt_min", f"{d.label} is singular where {names[0]} goes along a beam (a massless line "
                      "exchanged with the beam particle); set cuts.pt_min (or theta_min_deg and theta_max_deg) on "
                      f"it{where}, for example pt_min = 5")
    raise d.error("cuts.energy_min", f"{d.label} is singular where the {names[0]} becomes soft; set "
                  "cuts.energy_min (or cuts.pt_min, or cuts.pair_mass_min with a massless partner) on it"
                  f"{where}, for example energy_min = 5")


@_rule("cuts.particles names outgoing particles of the process (at least one); each minimum is below its maximum; "
       "each [[cuts.sets]] table names its particles and holds keys of [cuts].")
def _cut_keys(d: _Draft) -> None:
    _check_cut_table(d, d.sections["cuts"], "cuts")
    cut_sets(d)


def _check_cut_table(d: _Draft, cuts: dict, path: str) -> None:
    """The particles of one table of cuts resolved to outgoing particles, and its ranges ordered."""
    if "particles" in cuts:
        chosen = cuts["particles"]
        if not chosen:
            raise d.error(f"{path}.particles", "is empty, which would drop every cut; leave the key out to cut on "
                          "every outgoing particle" if path == "cuts" else "is empty; name the particles this set cuts")
        names = [lookup(tok, d.source, f"{path}.particles[{i}]").name for i, tok in enumerate(chosen)]
        outgoing = [p.name for p in d.outgoing]
        for i, name in enumerate(names):
            if name not in outgoing:
                raise d.error(f"{path}.particles[{i}]", f"{name!r} is not an outgoing particle of the process; "
                              "outgoing: " + ", ".join(outgoing))
        cuts["particles"] = names
    for lo, hi in (("theta_min_deg", "theta_max_deg"), ("energy_min", "energy_max"),
                   ("pt_min", "pt_max"), ("mass_min", "mass_max")):
        if cuts[lo] >= cuts[hi]:
            raise d.error(f"{path}.{lo}", f"{cuts[lo]!r} is not below {path}.{hi} = {cuts[hi]!r}")


@_rule("partons.set names a set that exists (in LHAPDF_DATA_PATH, among the shipped sets, or as a folder) with a "
       "readable .info file, and partons.member is one of its members.")
def _parton_set(d: _Draft) -> None:
    if not d.hadrons:
        return
    part = d.sections["partons"]
    try:
        d.parton_set = _pdf.read_header(_pdf.find_set(part["set"]))
    except _pdf.PdfError as exc:
        raise d.error("partons.set", str(exc)) from None
    if part["member"] >= d.parton_set.members:
        raise d.error("partons.member", f"{part['member']} does not exist; the set {d.parton_set.name!r} has members "
                      f"0..{d.parton_set.members - 1}")


@_rule("partons.alpha_s_mz is given only when partons.alpha_s runs (one_loop or two_loop); with set the "
       "coupling comes from the parton set.")
def _alpha_s_reference(d: _Draft) -> None:
    raw = d.doc.get("partons", {})
    if d.hadrons and "alpha_s_mz" in raw and d.sections["partons"]["alpha_s"] == "set":
        raise d.error("partons.alpha_s_mz", "has no effect with partons.alpha_s = \"set\" (alpha_s comes from the "
                      "parton set's table); set partons.alpha_s = \"one_loop\" or \"two_loop\" to run it from this value")


def _coloured(sp) -> bool:
    """Whether an outgoing particle (or a member of a group) carries colour."""
    return any(species(m).colour != 1 for m in sp.members) if sp.members else sp.colour != 1


@_rule("scales.renormalization and scales.factorization are one of auto, sqrt_shat, half_ht, pt, boson_mt (needs a "
       "colourless outgoing particle), jets_pt_mean (needs a coloured one), or a fixed scale in GeV inside the "
       "parton set's Q range.")
def _scales(d: _Draft) -> None:
    sc = d.sections["scales"]
    for k in ("renormalization", "factorization"):
        v, path = sc[k], f"scales.{k}"
        if isinstance(v, str):
            if v not in SCALE_CHOICES:
                raise d.error(path, f"{v!r} is not one of {', '.join(map(repr, SCALE_CHOICES))} or a number in GeV"
                              + close_matches(v, SCALE_CHOICES))
            coloured = [_coloured(sp) for sp in d.outgoing]
            if v == "boson_mt" and all(coloured):
                raise d.error(path, "boson_mt is the transverse mass of the colourless outgoing particles, and every "
                              "outgoing particle here is coloured; use half_ht or jets_pt_mean")
            if v == "jets_pt_mean" and not any(coloured):
                raise d.error(path, "jets_pt_mean is the geometric mean of the coloured outgoing particles' p_T, and "
                              "none comes out here; use boson_mt or sqrt_shat")
            continue
        lo, hi = d.parton_set.q_range if d.parton_set else (1.0, 1e5)
        Key(NUMBER, lo=lo, hi=hi, unit="GeV").check(d.source, path, v)


def _mass(d: _Draft, name: str) -> float:
    """A particle's mass: set by the model's parameters, else by [parameters.masses], else PDG."""
    sp = species(name)
    for gov, m in d.model.masses(d.params).items():
        if abs(species(gov).pdg) == abs(sp.pdg):
            return float(m)
    return float(d.mass_overrides.get(abs(sp.pdg), sp.mass))


@_rule("The beams carry at least the incoming particles' masses and sqrt(s) exceeds the outgoing masses; with "
       "hadron beams a resonance made alone lies below sqrt(s), every slot of a group holds particles of one mass, "
       "massless exchange (jets, photons) needs cuts.pt_min, a massless s-channel propagator (the photon of "
       "Drell-Yan, the gluon of q qbar -> q' qbar') needs cuts.mass_min or cuts.pt_min, and the cuts leave a range "
       "of pair masses; without a mass cut, pair masses start at the parton set's lowest scale.")
def _kinematics(d: _Draft) -> None:
    if d.hadrons:
        (_tree_hadron_kinematics if d.model.automatic else _hadron_kinematics)(d)
        return
    d.names = [p.name for p in d.incoming + d.outgoing]
    d.masses = [_mass(d, n) for n in d.names]
    if d.at_rest:
        if d.masses[0] <= sum(d.masses[1:]):
            raise d.error("process.outgoing", f"{' '.join(p.name for p in d.outgoing)} is heavier than "
                          f"{d.incoming[0].name} ({d.masses[0]:g} GeV)")
        return
    m1, m2 = d.masses[0], d.masses[1]
    col, key = d.sections["collider"], d.beam_key

    def along(e, m, sign):
        if e < m:
            raise d.error(key, f"beam energy {e:g} GeV is below the particle mass {m:g} GeV")
        return (float(e), 0.0, 0.0, sign * math.sqrt(max(e * e - m * m, 0.0)))

    if "sqrt_s" in col:
        rs = float(col["sqrt_s"])
        e1 = (rs * rs + m1 * m1 - m2 * m2) / (2.0 * rs)
        if rs <= m1 + m2:
            raise d.error(key, f"{rs:g} GeV is below the incoming masses {m1:g} + {m2:g} GeV")
        beams = (along(e1, m1, 1), along(rs - e1, m2, -1))
    elif "beam_energies" in col:
        e1, e2 = map(float, col["beam_energies"])
        beams = (along(e1, m1, 1), along(e2, m2, -1))
    else:
        beams = (along(float(col["beam_energy"]), m1, 1), (m2, 0.0, 0.0, 0.0))
    total = [a + b for a, b in zip(*beams)]
    sqrt_s = math.sqrt(max(total[0] ** 2 - total[1] ** 2 - total[2] ** 2 - total[3] ** 2, 0.0))
    threshold = sum(d.masses[2:])
    if sqrt_s <= threshold:
        raise d.error(key, f"sqrt(s) = {sqrt_s:.6g} GeV is below the threshold {threshold:.6g} GeV of "
                      f"{' '.join(p.name for p in d.outgoing)}")
    d.beams = beams
    spec = d.ordering.spec
    if spec.needs_angular_cut and len(d.outgoing) > 2 and d.sections["cuts"]["pair_mass_min"] <= 0.0:
        raise d.error("cuts.pair_mass_min", f"{spec.label} has soft and collinear singularities; keep every pair of "
                      f"partons apart in invariant mass, for example pair_mass_min = {0.1 * sqrt_s:.4g} "
                      "(0.1 sqrt(s), a y cut of 0.01)")


def _hadron_beams(d: _Draft) -> float:
    """The hadron beams' four-momenta into d.beams; returns s (GeV^2)."""
    col = d.sections["collider"]
    e1, e2 = (0.5 * float(col["sqrt_s"]),) * 2 if "sqrt_s" in col else map(float, col["beam_energies"])
    d.beams = ((e1, 0.0, 0.0, e1), (e2, 0.0, 0.0, -e2))
    return 4.0 * e1 * e2


def _slot_masses(d: _Draft) -> list[float]:
    """The mass of each outgoing slot in a hadron collision (one mass per slot)."""
    slot_masses = []
    for k, slot in enumerate(d.outgoing):
        ms = {_mass(d, sub.outgoing[k]) if sub.outgoing[k] in MASSIVE_IN_HADRON_COLLISIONS else 0.0
              for sub in d.subprocesses}
        if len(ms) > 1:
            raise d.error("process.outgoing", f"the slot {slot.name!r} holds particles of different masses "
                          f"({', '.join(f'{m:g}' for m in sorted(ms))} GeV); name them in separate cards")
        slot_masses.append(ms.pop())
    d.names = [p.name for p in d.incoming + d.outgoing]
    d.masses = [0.0, 0.0] + slot_masses
    return slot_masses


def _tree_hadron_kinematics(d: _Draft) -> None:
    """s-hat from the slots' transverse masses at their p_T cuts, or the square of a mass cut on some
    of them (the mass of a subset is at most sqrt(s-hat)), to s; [cuts] and every set count."""
    cuts = d.sections["cuts"]
    s = _hadron_beams(d)
    slot_masses = _slot_masses(d)
    names = [p.name for p in d.outgoing]
    tables = cut_sets(d)
    pt_of = [max([float(t["pt_min"]) for t in tables if n in t.get("particles", names)], default=0.0) for n in names]
    shat_min = sum(math.hypot(m, pt) for m, pt in zip(slot_masses, pt_of)) ** 2
    shat_min = max([shat_min] + [t["mass_min"] ** 2 for t in tables])
    selected = cuts.get("particles", names)
    shat_max = min(s, cuts["mass_max"] ** 2) if len(selected) == len(d.outgoing) else s
    if shat_min <= 0.0:
        raise d.error("cuts.pt_min", f"{d.label} has massless particles only: give cuts.pt_min (for example 20 GeV) or "
                      "cuts.mass_min, so that the parton energies stay away from zero")
    if shat_min >= shat_max:
        raise d.error("cuts", f"the cuts leave no room: s-hat from {shat_min:g} to {shat_max:g} GeV^2 at "
                      f"sqrt(s) = {math.sqrt(s):g} GeV")
    d.shat_range = (shat_min, shat_max)


def _hadron_kinematics(d: _Draft) -> None:
    cuts = d.sections["cuts"]
    s = _hadron_beams(d)
    sqrt_s = math.sqrt(s)
    slot_masses = _slot_masses(d)
    specs = [sub.spec for sub in d.subprocesses]
    if len(d.outgoing) == 1:
        m_res = float(d.params[specs[0].resonance[0]])
        if m_res >= sqrt_s:
            raise d.error(d.beam_key, f"sqrt(s) = {sqrt_s:g} GeV is below the mass {m_res:g} GeV")
        return
    m3, m4 = slot_masses
    pt_min = float(cuts["pt_min"])
    shat_min = (m3 + m4) ** 2
    if pt_min > 0:
        shat_min = max(shat_min, (math.hypot(m3, pt_min) + math.hypot(m4, pt_min)) ** 2)
    shat_max = s
    selected = cuts.get("particles", [p.name for p in d.outgoing])
    if len(selected) == len(d.outgoing):
        shat_min = max(shat_min, cuts["mass_min"] ** 2)
        shat_max = min(shat_max, cuts["mass_max"] ** 2)
    needs_pt = [sp for sp in specs if sp.needs_angular_cut]
    if needs_pt and pt_min <= 0.0:
        raise d.error("cuts.pt_min", f"{needs_pt[0].label} has poles where the outgoing particles go along the beams "
                      "(massless exchange); give cuts.pt_min (for example 20 GeV)")
    s_pole = [sp for sp in specs if sp.massless_s_pole]
    if s_pole and shat_min <= 0.0:
        raise d.error("cuts.mass_min", f"{s_pole[0].label} goes through a massless s-channel propagator, whose 1/s-hat "
                      "pole makes the cross-section grow without bound at small pair masses; give cuts.mass_min "
                      "(for example 10 GeV) or cuts.pt_min")
    if shat_min <= 0.0:
        if any(sp.resonance is None for sp in specs):
            raise d.error("cuts.mass_min", "massless particles need a lower bound on their invariant mass or "
                          "transverse momentum (cuts.mass_min or cuts.pt_min)")
        q_low = d.parton_set.q_range[0] if d.parton_set else 1.0
        shat_min = q_low**2  # a resonance alone: from the lowest scale of the parton densities
    if shat_min >= shat_max:
        raise d.error("cuts", f"the cuts leave no room: s-hat from {shat_min:g} to {shat_max:g} GeV^2 at "
                      f"sqrt(s) = {sqrt_s:g} GeV")
    d.shat_range = (shat_min, shat_max)


@_rule("[decays.<particle>] decays a particle the process makes (or a decay product makes) into two particles "
       "that conserve charge, lepton number of each generation and quark number, with colour lines gen can draw "
       "(a colour singlet into two singlets, a quark pair or two gluons, a quark into a quark and a singlet); the "
       "products are lighter than the parent; the branching ratio comes from the card, from the tree-level widths "
       "(Z, W, t) or from the Standard-Model table at m_H = 125.09 +- 0.5 GeV (H).")
def _decays(d: _Draft) -> None:
    raw = d.doc.get("decays")
    if raw is None:
        return
    if not isinstance(raw, dict):
        raise d.error("decays", f"expected tables [decays.<particle>], found {raw!r}")
    by_parent: dict[str, dict[str, Any]] = {}
    for name, table in raw.items():
        key = f"decays.{name}"
        parent = lookup(name, d.source, key)
        if parent.is_group or parent.is_hadron:
            raise d.error(key, f"{parent.name!r} is not a particle gen decays; name a particle")
        if not isinstance(table, dict):
            raise d.error(key, f"expected a table with into = [two particles], found {table!r}")
        checked = _keys_of(d, key, table, DECAY_KEYS)
        into = checked["into"]
        if len(into) != 2:
            raise d.error(f"{key}.into", f"expected two decay products, found {into!r}")
        products = tuple(lookup(p, d.source, f"{key}.into[{i}]") for i, p in enumerate(into))
        _conservation(d, key, parent, products)
        checked["into"] = [p.name for p in products]
        by_parent[parent.name] = checked
    d.decays = by_parent
    ew = _electroweak_for_decays(d)
    queue = list(range(len(d.incoming), len(d.names)))
    used = set()
    while queue:
        i = queue.pop(0)
        table = by_parent.get(d.names[i])
        if table is None:
            continue
        parent = d.names[i]
        used.add(parent)
        m = d.masses[i]
        kids = []
        for prod in table["into"]:
            d.names.append(prod)
            d.masses.append(_decay_mass(d, prod, ew))
            kids.append(len(d.names) - 1)
        if d.masses[kids[0]] + d.masses[kids[1]] >= m:
            raise d.error(f"decays.{parent}.into", f"{' '.join(table['into'])} is heavier than {parent} ({m:g} GeV); "
                          "decays into off-shell particles are not supported")
        br, source = table.get("branching_ratio"), "card"
        if br is None:
            br, channels = _widths.branching_ratio(parent, tuple(table["into"]), dict(ew, m_t=_decay_mass(d, "t", ew)))
            source = "Standard-Model table (CERN Yellow Report 4)" if parent == "H" else "tree-level partial widths"
            if br is None and not channels:
                why = (f"gen's Higgs branching ratios are the Standard-Model ones at m_H = "
                       f"{_widths.HIGGS_TABLE_MASS} GeV and this card's m_H is {ew['m_H']:g} GeV" if parent == "H"
                       else f"gen has no width table for {parent}")
                raise d.error(f"decays.{parent}.branching_ratio", f"{why}; give the branching ratio")
            if br is None:
                raise d.error(f"decays.{parent}.into", f"{parent} -> {' '.join(table['into'])} is not in gen's width "
                              f"table ({', '.join(channels)}); give decays.{parent}.branching_ratio to use it anyway")
        d.steps.append(DecayStep(i, (kids[0], kids[1]), parent, tuple(table["into"]), m, _decay_width(d, parent, ew),
                                 float(br), source, float(table["window"])))
        queue.extend(kids)
    for name in by_parent:
        if name not in used:
            made = ", ".join(d.names[len(d.incoming):len(d.incoming) + len(d.outgoing)])
            raise d.error(f"decays.{name}", f"the process makes no {name}; particles: {made}")


def _conservation(d: _Draft, key: str, parent: Species, products: tuple[Species, ...]) -> None:
    names = " ".join(p.name for p in products)
    if abs(sum(p.charge for p in products) - parent.charge) > 1e-9:
        raise d.error(f"{key}.into", f"{names} does not carry the charge of {parent.name}")
    if tuple(map(sum, zip(*(p.lepton_numbers for p in products)))) != parent.lepton_numbers:
        raise d.error(f"{key}.into", f"{parent.name} -> {names} does not conserve the lepton number of each "
                      "generation (e, mu, tau)")
    if sum(p.quark_number for p in products) != parent.quark_number:
        raise d.error(f"{key}.into", f"{parent.name} -> {names} does not conserve quark number")
    reps = sorted(abs(p.colour) for p in products)
    drawable = reps in ([1, 1], [3, 3], [8, 8]) if parent.colour == 1 else (abs(parent.colour) == 3 and reps == [1, 3])
    if not drawable:
        raise d.error(f"{key}.into", f"gen draws colour lines for a colour singlet into two singlets, a quark pair or "
                      f"two gluons, and for a quark into a quark and a singlet; {parent.name} -> {names} is none of them")


def _electroweak_for_decays(d: _Draft) -> dict[str, Any]:
    """Electroweak parameters for the masses, widths and branching ratios of decays: the card's when
    its model is the electroweak one, else the defaults with the card's mass overrides."""
    ew_model = MODELS["electroweak"]
    if d.model is ew_model:
        return dict(d.params)
    given = {}
    for name, par in (("Z", "m_Z"), ("H", "m_H"), ("W+", "m_W")):
        pdg = abs(species(name).pdg)
        if pdg in d.mass_overrides:
            given[par] = d.mass_overrides[pdg]
    return dict(ew_model.resolve(given))


def _decay_mass(d: _Draft, name: str, ew: dict) -> float:
    sp = species(name)
    for gov, m in MODELS["electroweak"].masses(ew).items():
        if abs(species(gov).pdg) == abs(sp.pdg):
            return float(m)
    return _mass(d, name)


def _decay_width(d: _Draft, name: str, ew: dict) -> float:
    """[parameters.widths], else the electroweak parameters (Z, W, H), else PDG."""
    sp = species(name)
    if abs(sp.pdg) in d.width_overrides:
        return d.width_overrides[abs(sp.pdg)]
    for gov, w in MODELS["electroweak"].widths(ew).items():
        if abs(species(gov).pdg) == abs(sp.pdg):
            return float(w)
    return float(sp.width)


@_rule("process.decay_spins applies to cards with [decays]; correlated needs a model of automatic amplitudes and "
       "fixed beams, and then a decay's window has no effect (the resonances are on their mass shell).")
def _decay_spins(d: _Draft) -> None:
    mode = d.sections["process"]["decay_spins"]
    given = "decay_spins" in d.doc.get("process", {})
    if given and not d.steps:
        raise d.error("process.decay_spins", "applies to the decays of [decays.<particle>], and the card has none")
    can = bool(d.model.automatic) and not d.hadrons and bool(d.steps)
    if mode == "correlated" and not can:
        why = (f"the {d.model.name} model's processes are hand-coded, with no amplitude to join the decays to; "
               "use process.model = \"standard\"") if not d.model.automatic else \
            "with hadron beams the decays are isotropic for now"
        raise d.error("process.decay_spins", f"correlated decays are not available here: {why}; or set "
                      "process.decay_spins = \"isotropic\"")
    d.decay_spins = "correlated" if mode == "correlated" or (mode == "auto" and can) else "isotropic"
    if d.decay_spins == "correlated":
        for name, table in d.doc.get("decays", {}).items():
            if isinstance(table, dict) and "window" in table:
                raise d.error(f"decays.{name}.window", "has no effect with correlated decays: the resonances are on "
                              "their mass shell; leave it out, or set process.decay_spins = \"isotropic\" for "
                              "Breit-Wigner masses in the window")


@_rule("Every entry of [parameters.masses] and [parameters.widths] has an effect: a mass belongs to a particle of "
       "the process or its decays whose mass the process uses (partons and leptons are massless in hadron "
       "collisions), a width to a particle the card decays.")
def _overrides_have_an_effect(d: _Draft) -> None:
    n_production = len(d.incoming) + len(d.outgoing)
    production = [n for n in d.names[:n_production] if not species(n).is_group]
    if d.hadrons:  # partons, leptons and photons are massless in hadron collisions
        production = [n for n in production if n in MASSIVE_IN_HADRON_COLLISIONS]
    used = {abs(species(n).pdg) for n in production + d.names[n_production:]}
    for pdg, path in d.mass_keys.items():
        if pdg not in used:
            raise d.error(path, "no particle of this process or its decays uses this mass"
                          + ("; partons, leptons and photons are massless in hadron collisions" if d.hadrons else ""))
    decayed = {abs(species(st.particle).pdg) for st in d.steps}
    for pdg, path in d.width_keys.items():
        if pdg not in decayed:
            raise d.error(path, "a width here sets the Breit-Wigner masses of a decay, and the card does not decay "
                          "this particle; add a [decays.<particle>] table or leave the width out")


@_rule("The card writes something: sampling.events and sampling.weighted_events are not both 0.")
def _writes_something(d: _Draft) -> None:
    _something_to_write(d.source, d.sections["sampling"])


def _something_to_write(source: str, sampling: dict) -> None:
    if sampling["events"] == 0 and sampling["weighted_events"] == 0:
        raise CardError(source, "sampling.events", "sampling.events and sampling.weighted_events are both 0: the run "
                        "would write nothing; ask for unweighted or weighted events")


# --- the pass --------------------------------------------------------------------------------------

def _section_of(key: str) -> str | None:
    for sec, keys in SPEC.items():
        if key in keys:
            return sec
    return None


def _keys_of(d: _Draft, path: str, raw: dict, spec: dict[str, Key]) -> dict[str, Any]:
    """A table's keys checked against their descriptions, with defaults filled in."""
    out: dict[str, Any] = {}
    for k, v in raw.items():
        if k not in spec:
            home = _section_of(k)
            where = f"; {k} belongs in [{home}]" if home and home != path else ""
            raise d.error(f"{path}.{k}", "unknown key" + close_matches(k, spec) + where + "; accepted keys: "
                          + ", ".join(spec))
        out[k] = spec[k].check(d.source, f"{path}.{k}", v)
    for k, key in spec.items():
        if k not in out:
            if key.required:
                raise d.error(f"{path}.{k}", f"missing; required ({key.doc})")
            if key.default is not None:
                out[k] = key.default
    return out


def _toml(text: str, source: str) -> dict:
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise CardError(source, "", f"not valid TOML: {exc}") from None
    except RecursionError:
        raise CardError(source, "", "not a usable card: arrays or tables are nested too deeply") from None


def parse_card(text: str, source: str = "<card>") -> RunConfig:
    """Validate card text (TOML) and return its RunConfig, or raise CardError."""
    return parse_doc(_toml(text, source), source, text)


def parse_doc(doc: dict, source: str, text: str) -> RunConfig:
    """Validate a card already read from TOML (`text` is kept as the card's text)."""
    d = _Draft(source, text, doc)
    for k in doc:
        if k not in SECTIONS:
            home = _section_of(k)
            where = f"; {k} is a key of [{home}]" if home else ""
            raise d.error(k, "unknown section" + close_matches(k, SECTIONS) + where + "; accepted sections: "
                          + ", ".join(SECTIONS))
    for name, keys in SPEC.items():
        raw = doc.get(name, {})
        if not isinstance(raw, dict):
            raise d.error(name, f"expected a table [{name}], found {raw!r}")
        d.sections[name] = _keys_of(d, name, raw, keys)
    for rule in RULES:
        rule.check(d)
    resolved = Resolved(
        parameters=d.params, names=tuple(d.names), masses=tuple(d.masses), ordering=d.ordering,
        subprocesses=d.subprocesses, beams=d.beams, beam_key=d.beam_key, shat_range=d.shat_range,
        parton_set=d.parton_set, decays=tuple(d.steps))
    sec = d.sections
    return RunConfig(
        source=source, text=text, model=d.model.name, incoming=d.incoming, outgoing=d.outgoing,
        collider=sec["collider"], parameters=d.given, masses=d.mass_overrides, widths=d.width_overrides,
        cuts=sec["cuts"], partons=sec["partons"], scales=sec["scales"], decays=d.decays,
        integration=sec["integration"], sampling=sec["sampling"], output=sec["output"], resolved=resolved,
        process_options=dict({k: sec["process"][k] for k in ("helicities", "colours")} if d.model.automatic else {},
                             decay_spins=d.decay_spins))


def load_card(path: str | Path) -> RunConfig:
    """Read and validate a card file."""
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise CardError(str(p), "", "no such card file") from None
    except IsADirectoryError:
        raise CardError(str(p), "", "is a folder, not a card file") from None
    except UnicodeDecodeError as exc:
        raise CardError(str(p), "", f"not UTF-8 text ({exc.reason} at byte {exc.start}); a card is TOML text") from None
    except OSError as exc:
        raise CardError(str(p), "", f"cannot read the card: {exc.strerror or exc}") from None
    return parse_card(text, str(p))


# --- the reference ---------------------------------------------------------------------------------

def reference_markdown() -> str:
    """The card reference as Markdown: every key (SPEC, the models' parameters, the particle tables
    and the decay keys), then every rule."""
    lines = ["| key | type | default | range / choices | unit | meaning |", "|---|---|---|---|---|---|"]

    def row(label: str, key: Key) -> None:
        lines.append(f"| {label} | {type_name(key.kind)} | {key.default_text()} | {key.range_doc()} | {key.unit} | "
                     f"{key.doc} |")

    for sec, keys in SPEC.items():
        for k, key in keys.items():
            row(f"`{sec}.{k}`", key)
    for name, model in MODELS.items():
        for k, key in model.params.items():
            row(f"`parameters.{k}` ({name})", key)
    row("`parameters.masses.<particle>`", replace(PARTICLE_VALUE, doc="mass of a particle and its antiparticle"))
    row("`parameters.widths.<particle>`", replace(PARTICLE_VALUE, doc="width of a particle and its antiparticle (for "
                                                  "the Breit-Wigner masses of its decays)"))
    for k, key in DECAY_KEYS.items():
        row(f"`decays.<particle>.{k}`", key)
    lines += ["", f"Card format {CARD_SCHEMA_VERSION}. Rules checked after the keys, in this order:", ""]
    lines += [f"{i}. {r.doc}" for i, r in enumerate(RULES, 1)]
    return "\n".join(lines) + "\n"


# the cuts' defaults, for code that asks whether a cut is active
CUT_DEFAULTS = {k: key.default for k, key in SPEC["cuts"].items()}
