"""Every demo card's process implements the declared process interface, and what it returns has
the shapes and meanings the interface states (the interface is gen.processes.interface; checks of
shapes and conservation are common practice, no source)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from gen.card import load_card
from gen.processes import CannotValidate, Channel, EventData, Measure, ParticleLayout, Process, ValidationPlan
from gen.processes import build_process
from gen.records.schema import schema_doc

CARDS = sorted((Path(__file__).parent.parent / "cards").glob("*.toml"))


@pytest.fixture(scope="module", params=CARDS, ids=[c.stem for c in CARDS])
def built(request):
    cfg = load_card(request.param)
    return cfg, build_process(cfg)


def test_the_process_is_an_instance_of_the_interface(built):
    cfg, proc = built
    assert isinstance(proc, Process)
    assert proc.cfg is cfg
    assert isinstance(proc.measure, Measure) and proc.measure.unit in ("pb", "GeV")
    assert proc.channels and all(isinstance(c, Channel) and c.ndim >= 1 for c in proc.channels)
    assert proc.ndim == sum(c.ndim for c in proc.channels)
    assert len(proc.species) == len(cfg.incoming) + len(cfg.outgoing) == len(proc.masses)
    assert isinstance(proc.params, dict)


def test_weights_and_events_have_the_declared_shapes(built):
    cfg, proc = built
    rng = np.random.default_rng(5)
    x = rng.random((3000, proc.ndim))
    w = proc.weights(x)
    assert w.shape == (3000,) and np.all(np.isfinite(w)) and np.all(w >= 0) and np.any(w > 0)
    layout = proc.particle_layout()
    assert isinstance(layout, ParticleLayout)
    roles = schema_doc()["roles"]
    assert set(layout.roles) <= set(roles) and len(layout.roles) == layout.n
    live = x[w > 0][:500]
    data = proc.events(live, rng)
    assert isinstance(data, EventData)
    p = data.momenta
    assert p.shape == (live.shape[0], layout.n, 4) and np.all(np.isfinite(p))
    for name in ("pdg", "colour", "anticolour", "mass"):
        values = getattr(data, name)
        assert values is None or values.shape == (live.shape[0], layout.n)
    for name in ("subprocess", "scale", "factorization_scale", "alpha_s", "x1", "x2"):
        values = getattr(data, name)
        assert values is None or values.shape == (live.shape[0],)
    # four-momentum conservation between the incoming and the final outgoing particles
    incoming = [i for i, r in enumerate(layout.roles) if r == "incoming"]
    final = [i for i, r in enumerate(layout.roles) if r == "outgoing"]
    scale = p[:, incoming, 0].sum(axis=1)[:, None]
    assert np.all(np.abs(p[:, incoming].sum(1) - p[:, final].sum(1)) <= 1e-9 * scale)


def test_record_sections_and_couplings(built):
    cfg, proc = built
    sections = proc.record_sections()
    assert {"process", "parameters", "collider"} <= set(sections)
    assert sections["process"]["label"] == cfg.label
    assert sections["collider"]["sqrt_s_GeV"] > 0
    assert set(sections["parameters"]["masses_GeV"]) == {p.name for p in proc.species}
    couplings = proc.couplings()
    assert couplings and all(isinstance(v, float) and np.isfinite(v) for v in couplings.values())


def test_validation_is_a_plan_or_a_stated_reason(built):
    _, proc = built
    try:
        plan = proc.validation()
    except CannotValidate as exc:
        assert "gen validate" in str(exc) or "validation" in str(exc)
        return
    assert isinstance(plan, ValidationPlan) and plan.observables
    w, obs = plan.reference(1)
    assert w.ndim == 1 and np.all(np.isfinite(w)) and w.sum() > 0
    assert set(plan.observables) <= set(obs) and all(obs[k].shape == w.shape for k in plan.observables)
