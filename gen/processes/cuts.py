"""The card's cuts on laboratory momenta, applied to arrays of events."""

from __future__ import annotations

import math

import numpy as np

from ..card import CUT_DEFAULTS, RunConfig
from ..physics.kinematics import azimuth, delta_r, mass, pseudorapidity, pt, rapidity

__all__ = ["Cuts"]


class Cuts:
    """The card's cuts: [cuts] on the outgoing particles it selects (`cuts.particles`, default all)
    and every [[cuts.sets]] table on its own particles; an event passes when it passes them all."""

    def __init__(self, cfg: RunConfig):
        self.values = {k: v for k, v in cfg.cuts.items() if k != "sets"}
        self.selected = _selected(cfg, self.values)
        self.sets = [(table, _selected(cfg, table)) for table in cfg.cuts.get("sets", ())]
        self.active = _is_active(self.values) or any(_is_active(t) for t, _ in self.sets)

    def tables(self, slot: int):
        """The tables of cuts (the [cuts] values and each of [[cuts.sets]]) that select outgoing slot."""
        return [t for t, sel in [(self.values, self.selected)] + self.sets if slot in sel]

    def lower(self, key: str, slot: int) -> float:
        """The tightest lower bound `key` (pt_min, say) that any table puts on outgoing slot."""
        return max((float(t[key]) for t in self.tables(slot) if key in t), default=0.0)

    def upper(self, key: str, slot: int) -> float:
        """The tightest upper bound `key` (eta_max, say) that any table puts on outgoing slot."""
        return min((float(t[key]) for t in self.tables(slot) if key in t), default=math.inf)

    def pair_s_min(self, legs) -> float:
        """The smallest invariant mass squared (GeV^2) that the cuts allow the outgoing slots `legs`
        together: the tightest pair_mass_min of the tables that select both of a pair, else 0."""
        if len(legs) != 2:
            return 0.0
        both = [t for t in self.tables(legs[0]) if any(t is u for u in self.tables(legs[1]))]
        return max((float(t["pair_mass_min"]) ** 2 for t in both), default=0.0)

    def mask(self, out: np.ndarray) -> np.ndarray:
        """True for events whose outgoing laboratory momenta out (N, n, 4) pass the cuts."""
        if not self.active:
            return np.ones(out.shape[0], dtype=bool)
        ok = _table_mask(self.values, out[:, self.selected, :])
        for table, sel in self.sets:
            ok &= _table_mask(table, out[:, sel, :])
        return ok


def _selected(cfg: RunConfig, table: dict) -> list[int]:
    return [i for i, sp in enumerate(cfg.outgoing) if "particles" not in table or sp.name in table["particles"]]


def _is_active(table: dict) -> bool:
    return any(v != CUT_DEFAULTS[k] for k, v in table.items() if k not in ("particles", "sets"))


def _table_mask(c: dict, sel: np.ndarray) -> np.ndarray:
    """One table of cuts on the momenta (N, k, 4) of the particles it selects."""
    ok = np.ones(sel.shape[0], dtype=bool)
    if not _is_active(c):
        return ok
    e = sel[..., 0]
    p_t = pt(sel)
    if c["theta_min_deg"] > 0.0 or c["theta_max_deg"] < 180.0:
        pabs = np.hypot(p_t, sel[..., 3])
        cos_t = np.divide(sel[..., 3], pabs, out=np.ones_like(pabs), where=pabs > 0)
        ok &= np.all((cos_t <= math.cos(math.radians(c["theta_min_deg"])))
                     & (cos_t >= math.cos(math.radians(c["theta_max_deg"]))), axis=1)
    if c["energy_min"] > 0.0 or c["energy_max"] < math.inf:
        ok &= np.all((e >= c["energy_min"]) & (e <= c["energy_max"]), axis=1)
    if c["pt_min"] > 0.0 or c["pt_max"] < math.inf:
        ok &= np.all((p_t >= c["pt_min"]) & (p_t <= c["pt_max"]), axis=1)
    if c["mass_min"] > 0.0 or c["mass_max"] < math.inf:
        m = mass(sel.sum(axis=1))
        ok &= (m >= c["mass_min"]) & (m <= c["mass_max"])
    if c.get("sum_pt_min", 0.0) > 0.0:
        ok &= pt(sel.sum(axis=1)) >= c["sum_pt_min"]
    pairs = [(i, j) for i in range(sel.shape[1]) for j in range(i + 1, sel.shape[1])]
    if c["pair_mass_min"] > 0.0:
        for i, j in pairs:
            ok &= mass(sel[:, i] + sel[:, j]) >= c["pair_mass_min"]
    if c["eta_max"] < math.inf or c["delta_r_min"] > 0.0:
        eta = np.nan_to_num(pseudorapidity(sel), nan=np.inf)  # along the beam: +-inf; nan counts as outside
        if c["eta_max"] < math.inf:
            ok &= np.all(np.abs(eta) <= c["eta_max"], axis=1)
        if c["delta_r_min"] > 0.0:
            phi = azimuth(sel)
            for i, j in pairs:
                ok &= delta_r(eta[:, i], phi[:, i], eta[:, j], phi[:, j]) >= c["delta_r_min"]
    if c["rapidity_max"] < math.inf:
        ok &= np.all(np.abs(np.nan_to_num(rapidity(sel), nan=np.inf)) <= c["rapidity_max"], axis=1)
    return ok
