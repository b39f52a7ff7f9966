"""Decay chains in the narrow-width approximation.

A card's `[decays]` section names, for a particle the process makes, the two particles it decays
into (and, optionally, the branching ratio and the mass window); decay products may decay again
(t -> b W+, W+ -> e+ nu_e). The cross-section is that of the production times the product of the
branching ratios, which come from the tree-level partial widths of `gen.widths` unless the card
gives them.

Each event's resonance mass is drawn from a Breit-Wigner (fixed width) truncated to the window
M +- window x Gamma (and to what the event's energy allows). The production is generated at the
nominal masses; its final state is then rebuilt with the drawn masses at the same angles in its
own rest frame, so momentum is conserved at every step, and the mass does not reweight the event.
Decays are isotropic in the resonance's rest frame: spin correlations between production and
decay are not kept (they are exact where the full |M|^2 of the final state is in the library,
as for e+e- -> gamma*/Z -> l+ l-, Drell-Yan or W production). The decayed particle is written as
`intermediate`, its products as `outgoing` with parent links to it.
"""

from __future__ import annotations

import math
from collections import Counter
from dataclasses import dataclass

import numpy as np

from .errors import CardError
from .events import EventData, EventLayout
from .matrix import MODELS
from .particles import lookup, species
from .phasespace import boost, two_body_decay
from .widths import branching_ratios, partial_widths

__all__ = ["Decay", "DecayChain", "WithDecays", "parse_decays"]

_TABLES = {"Z": "Z", "H": "H", "W+": "W+", "W-": "W+", "t": "t", "tbar": "t"}
_CONJ = {"W-": "W+", "tbar": "t"}


@dataclass(frozen=True)
class Decay:
    parent: str
    products: tuple[str, str]
    branching_ratio: float | None  # None: from the partial widths
    window: float  # half-width of the mass window in units of the width


def parse_decays(source: str, raw) -> dict[str, Decay]:
    """The `[decays]` section: a table per decaying particle with `into` (two particles) and the
    optional `branching_ratio` and `window`."""
    if raw is None:
        return {}
    if not isinstance(raw, dict):
        raise CardError(source, "decays", f"expected tables [decays.<particle>], found {raw!r}")
    out: dict[str, Decay] = {}
    for name, table in raw.items():
        key = f"decays.{name}"
        parent = lookup(name, source, key).name
        if not isinstance(table, dict):
            raise CardError(source, key, f"expected a table with into = [two particles], found {table!r}")
        for k in table:
            if k not in ("into", "branching_ratio", "window"):
                raise CardError(source, f"{key}.{k}", "unknown key; accepted keys: into, branching_ratio, window")
        into = table.get("into")
        if not isinstance(into, list) or len(into) != 2:
            raise CardError(source, f"{key}.into", f"expected two decay products, found {into!r}")
        products = tuple(lookup(p, source, f"{key}.into[{i}]").name for i, p in enumerate(into))
        br = table.get("branching_ratio")
        if br is not None and (isinstance(br, bool) or not isinstance(br, (int, float)) or not 0 < br <= 1):
            raise CardError(source, f"{key}.branching_ratio", f"expected a number in (0, 1], found {br!r}")
        window = table.get("window", 10.0)
        if isinstance(window, bool) or not isinstance(window, (int, float)) or not window > 0:
            raise CardError(source, f"{key}.window", f"expected a positive number of widths, found {window!r}")
        charge = sum(species(p).charge for p in products)
        if abs(charge - species(parent).charge) > 1e-9:
            raise CardError(source, f"{key}.into", f"{' '.join(products)} does not carry the charge of {parent}")
        out[parent] = Decay(parent, products, None if br is None else float(br), float(window))
    return out


@dataclass
class _Step:
    parent: int  # index in the event's particle list
    children: tuple[int, int]
    decay: Decay
    mass: float
    width: float
    branching_ratio: float


class DecayChain:
    """The decays of one run: which particles decay, into what, with which masses and widths."""

    def __init__(self, cfg, names: list[str], masses: list[float], params: dict):
        self.cfg = cfg
        src = cfg.source
        ew = dict(MODELS["electroweak"].resolve({}))
        ew.update({k: v for k, v in params.items() if k in ew})
        for pdg, m in cfg.masses.items():
            for n in ("t", "H", "Z", "W+"):
                if abs(species(n).pdg) == pdg:
                    ew[{"t": "m_t", "H": "m_H", "Z": "m_Z", "W+": "m_W"}[n]] = m
        self.n_production = len(names)
        self.names = list(names)
        self.masses = list(masses)
        self.steps: list[_Step] = []
        decays = cfg.decays
        used = set()
        queue = list(range(len(cfg.incoming), len(names)))  # the outgoing particles of the production
        while queue:
            i = queue.pop(0)
            d = decays.get(self.names[i])
            if d is None:
                continue
            used.add(d.parent)
            m, w = self._mass_width(d.parent, ew, i)
            kids = []
            for prod in d.products:
                self.names.append(prod)
                self.masses.append(self._mass_width(prod, ew, None)[0])
                kids.append(len(self.names) - 1)
            if self.masses[kids[0]] + self.masses[kids[1]] >= m:
                raise CardError(src, f"decays.{d.parent}.into", f"{' '.join(d.products)} is heavier than {d.parent} "
                                f"({m:g} GeV); decays into off-shell particles are not supported")
            br = d.branching_ratio if d.branching_ratio is not None else self._branching_ratio(d, ew, src)
            self.steps.append(_Step(i, (kids[0], kids[1]), d, m, w, br))
            queue.extend(kids)
        for name in decays:
            if name not in used:
                raise CardError(src, f"decays.{name}", f"the process makes no {name}; particles: "
                                + ", ".join(self.names[len(cfg.incoming):self.n_production]))
        self.branching_ratio = math.prod(s.branching_ratio for s in self.steps)

    def _mass_width(self, name: str, ew: dict, index: int | None) -> tuple[float, float]:
        sp = species(name)
        if index is not None and index < self.n_production:
            m = self.masses[index]
        else:
            m = {"Z": ew["m_Z"], "H": ew["m_H"], "W+": ew["m_W"], "W-": ew["m_W"]}.get(name)
            if m is None:
                m = self.cfg.masses.get(abs(sp.pdg), sp.mass)
        width = self.cfg.widths.get(abs(sp.pdg))
        if width is None:
            width = {"Z": ew["width_Z"], "H": ew["width_H"], "W+": ew["width_W"], "W-": ew["width_W"]}.get(name, sp.width)
        return float(m), float(width)

    def _branching_ratio(self, d: Decay, ew: dict, src: str) -> float:
        table = _TABLES.get(d.parent)
        if table is None:
            raise CardError(src, f"decays.{d.parent}.branching_ratio", f"gen has no width table for {d.parent}; give "
                            "the branching ratio")
        products = d.products
        if d.parent in _CONJ:
            products = tuple(_anti(p) for p in products)
        widths = partial_widths(table, dict(ew, m_t=ew.get("m_t", species("t").mass)))
        brs = branching_ratios(widths)
        for channel, br in brs.items():
            if Counter(channel.split()) == Counter(products):
                return br
        raise CardError(src, f"decays.{d.parent}.into", f"{d.parent} -> {' '.join(d.products)} is not in gen's width "
                        f"table ({', '.join(brs)}); give decays.{d.parent}.branching_ratio to use it anyway")

    # --- events ---------------------------------------------------------------------------------
    def layout(self, base: EventLayout) -> EventLayout:
        n = len(self.names)
        roles = list(base.roles) + ["outgoing"] * (n - base.n)
        pf = np.concatenate([base.parent_first, np.zeros(n - base.n, np.int16)])
        pl = np.concatenate([base.parent_last, np.zeros(n - base.n, np.int16)])
        for st in self.steps:
            roles[st.parent] = "intermediate"
            for k in st.children:
                pf[k] = pl[k] = st.parent
        pdg = np.concatenate([base.pdg, np.array([species(nm).pdg for nm in self.names[base.n:]], np.int32)])
        zeros = np.zeros(n - base.n, np.int32)
        return EventLayout(pdg=pdg, roles=roles, parent_first=pf.astype(np.int16), parent_last=pl.astype(np.int16),
                           colour=np.concatenate([base.colour, zeros]), anticolour=np.concatenate([base.anticolour, zeros]),
                           mass=np.array(self.masses, np.float64), subprocesses=base.subprocesses, scale=base.scale,
                           alpha_em=base.alpha_em, alpha_s=base.alpha_s)

    def _draw_mass(self, st: _Step, n: int, lo: np.ndarray, rng) -> np.ndarray:
        """Masses from a Breit-Wigner in s truncated to the window and to at least lo per event."""
        m, w = st.mass, st.width
        if w <= 0.0:
            return np.full(n, m)
        lo = np.maximum(lo, m - st.decay.window * w)
        hi = m + st.decay.window * w
        a1 = np.arctan((np.maximum(lo, 0.0) ** 2 - m * m) / (m * w))
        a2 = np.arctan((hi * hi - m * m) / (m * w))
        s = m * m + m * w * np.tan(a1 + (a2 - a1) * rng.random(n))
        return np.sqrt(np.clip(s, (lo * lo), (hi * hi)))

    def apply(self, data: EventData, base: EventLayout, rng: np.random.Generator) -> EventData:
        """Events with every decay done: intermediate particles and their products appended."""
        p0 = data.momenta
        nev, n0 = p0.shape[0], p0.shape[1]
        n = len(self.names)
        mass = np.tile(np.array(self.masses), (nev, 1))
        # masses: products first (innermost decays last in the list), so parents see their children
        for st in reversed(self.steps):
            kids_min = mass[:, st.children[0]] + mass[:, st.children[1]]
            mass[:, st.parent] = self._draw_mass(st, nev, kids_min * (1 + 1e-9), rng)
        p = np.zeros((nev, n, 4))
        p[:, :n0] = p0
        self._remass_production(p, mass, n0)
        for st in self.steps:
            k1, k2 = st.children
            cos_t = 2.0 * rng.random(nev) - 1.0
            phi = rng.random(nev) * (2.0 * math.pi)
            p[:, k1], p[:, k2], _ = two_body_decay(p[:, st.parent], mass[:, st.parent], mass[:, k1], mass[:, k2], cos_t, phi)
        pdg = None
        if data.pdg is not None:
            pdg = np.empty((nev, n), np.int32)
            pdg[:, :n0] = data.pdg
            pdg[:, n0:] = np.array([species(nm).pdg for nm in self.names[n0:]], np.int32)
        colour = np.zeros((nev, n), np.int32)
        anti = np.zeros((nev, n), np.int32)
        colour[:, :n0] = base.colour if data.colour is None else data.colour
        anti[:, :n0] = base.anticolour if data.anticolour is None else data.anticolour
        for st in self.steps:
            self._colour(st, colour, anti)
        return EventData(p, pdg, colour, anti, data.subprocess, data.scale, data.factorization_scale,
                         data.alpha_s, data.x1, data.x2, mass)

    def _remass_production(self, p: np.ndarray, mass: np.ndarray, n0: int) -> None:
        """Rebuild a 2 -> 2 production final state with the drawn masses at the same angles in its
        rest frame; where the masses do not fit the event's energy, keep the nominal ones. Other
        productions (2 -> 1, decays at rest, three outgoing) keep their resonances at the mass the
        production gave them."""
        decayed = [st.parent for st in self.steps if st.parent < n0]
        if not decayed:
            return
        if len(self.cfg.incoming) != 2 or n0 != 4:
            for i in decayed:
                mass[:, i] = np.sqrt(np.clip(p[:, i, 0] ** 2 - (p[:, i, 1:] ** 2).sum(1), 0.0, None))
            return
        total = p[:, 2] + p[:, 3]
        m_tot = np.sqrt(np.clip(total[:, 0] ** 2 - (total[:, 1:] ** 2).sum(1), 0.0, None))
        beta = total[:, 1:] / total[:, :1]
        rest = boost(p[:, 2].copy(), -beta)
        r = np.linalg.norm(rest[:, 1:], axis=1)
        cos_t = np.clip(rest[:, 3] / np.where(r > 0, r, 1.0), -1.0, 1.0)
        phi = np.arctan2(rest[:, 2], rest[:, 1])
        fits = mass[:, 2] + mass[:, 3] < m_tot
        mass[~fits, 2:4] = np.array(self.masses[2:4])
        p[:, 2], p[:, 3], _ = two_body_decay(total, m_tot, mass[:, 2], mass[:, 3], cos_t, phi)

    @staticmethod
    def _colour(st: _Step, colour: np.ndarray, anti: np.ndarray) -> None:
        k1, k2 = st.children
        c, a = colour[:, st.parent], anti[:, st.parent]
        names = [species(st.decay.products[0]), species(st.decay.products[1])]
        if species(st.decay.parent).is_quark:  # the quark child carries the parent's colour line
            for k, sp in zip((k1, k2), names):
                if sp.is_quark:
                    colour[:, k], anti[:, k] = c, a
            return
        if all(sp.is_quark for sp in names):  # a colour singlet into q qbar: a new line
            new = np.maximum(colour.max(axis=1), anti.max(axis=1)) + 1
            for k, sp in zip((k1, k2), names):
                if sp.colour == 3:
                    colour[:, k] = new
                else:
                    anti[:, k] = new

    def describe(self) -> list[dict]:
        return [{"particle": st.decay.parent, "index": st.parent, "into": list(st.decay.products),
                 "branching_ratio": st.branching_ratio,
                 "branching_ratio_source": "card" if st.decay.branching_ratio is not None else "tree-level partial widths",
                 "mass_GeV": st.mass, "width_GeV": st.width, "window_widths": st.decay.window} for st in self.steps]


class WithDecays:
    """A process followed by its card's decay chain: sigma x BR, events with the decays done."""

    def __init__(self, proc):
        self.proc = proc
        self._base = proc.event_layout()
        self.chain = DecayChain(proc.cfg, [p.name for p in proc.species], list(proc.masses), dict(proc.params))
        self._layout = self.chain.layout(self._base)

    def __getattr__(self, name):
        return getattr(self.proc, name)

    def weights(self, x):
        return self.proc.weights(x) * self.chain.branching_ratio

    def events(self, x, rng: np.random.Generator) -> EventData:
        return self.chain.apply(self.proc.events(x, rng), self._base, rng)

    def momenta(self, x, rng):
        return self.events(x, rng).momenta

    def event_layout(self) -> EventLayout:
        return self._layout

    def record_sections(self) -> dict:
        rec = self.proc.record_sections()
        rec["decays"] = {"chain": self.chain.describe(), "total_branching_ratio": self.chain.branching_ratio,
                         "treatment": "narrow width: sigma(production) x branching ratios; Breit-Wigner masses in the "
                                      "window; isotropic decays (no spin correlations)"}
        return rec


def _anti(name: str) -> str:
    sp = species(name)
    for cand in (name[:-3] if name.endswith("bar") else name + "bar", name.replace("+", "-") if "+" in name
                 else name.replace("-", "+")):
        try:
            if species(cand).pdg == -sp.pdg:
                return cand
        except KeyError:
            continue
    return name
