"""One particle decaying at rest: the integral is its partial width (GeV)."""

from __future__ import annotations

import numpy as np

from ..card import RunConfig
from ..physics.phasespace import sequential
from .base import SpecProcess
from .interface import PARTIAL_WIDTH, CannotValidate, Channel, EventData

__all__ = ["DecayAtRest"]


class DecayAtRest(SpecProcess):
    """One particle decaying at rest into two or three: the integral over [0, 1]^(3n - 4) is its
    partial width Gamma = (1/2m) int |M|^2 dPhi_n in GeV (sequential phase space; the orientation is
    part of x). The file's weights then hold GeV; the record's `measure` says so."""

    measure = PARTIAL_WIDTH

    def __init__(self, cfg: RunConfig):
        super().__init__(cfg)
        self.m = self.masses[0]
        self.n_out = len(cfg.outgoing)
        self.channels = (Channel("sequential splittings", 3 * self.n_out - 4),)
        self.p_parent = np.array([self.m, 0.0, 0.0, 0.0])

    def _scale(self) -> float:
        return self.m

    def _momenta(self, x):
        out, w_ps = sequential(x, self.m, self.masses[1:])
        p = np.empty((x.shape[0], 1 + self.n_out, 4))
        p[:, 0] = self.p_parent
        p[:, 1:] = out
        return p, w_ps

    def weights(self, x):
        p, w_ps = self._momenta(x)
        me = self.spec.momentum_matrix(p[:, self.canonical], self.me_params)
        w = self.spec.symmetry * me * w_ps / (2.0 * self.m)
        if self.cuts.active:
            w = np.where(self.cuts.mask(p[:, 1:]), w, 0.0)
        return w

    def events(self, x, rng) -> EventData:
        return EventData(self._momenta(x)[0])

    def record_sections(self) -> dict:
        return {"process": self.process_section(), "parameters": self.parameter_section(),
                "collider": {"at_rest": True, "sqrt_s_GeV": self.m, "beam1_GeV": self.p_parent.tolist(),
                             "cm_beta_z": 0.0, "cm_rapidity": 0.0}}

    def validation(self, claimed=None):
        raise CannotValidate(f"gen validate has no reference for {self.cfg.label} decaying at rest; its width, "
                             "lifetime and electron spectrum are checked by the test suite (tests/test_decays.py)")
