"""The sampler's arithmetic and reporting: iteration averages, consistency warning, progress."""

from __future__ import annotations

import io

import numpy as np

import pytest
from scipy.stats import chi2

import gen
from gen.card import parse_card
from gen.progress import Progress
from gen.jobs.run import ConsistencyWarning
from gen.sampling.sampler import CrossSection, _combine

from conftest import card


def test_inverse_variance_average_and_q_against_a_hand_calculation():
    its = ((10.0, 1.0), (12.0, 2.0), (11.0, 1.0))
    # hand calculation: weights 1, 1/4, 1 -> mean = (10 + 3 + 11) / 2.25, error = 1/sqrt(2.25)
    value, error = _combine(list(its))
    assert value == pytest.approx(24.0 / 2.25) and error == pytest.approx(1.0 / 1.5)
    xs = CrossSection(value, error, its)
    c2 = sum(((v - value) / e) ** 2 for v, e in its)
    assert xs.chi2_dof == pytest.approx(c2 / 2)
    assert xs.q == pytest.approx(chi2.sf(c2, 2))  # scipy.stats as the reference
    assert "chi2/dof" in xs.summary()


def test_inconsistent_iterations_raise_a_warning(tmp_path):
    text = card("qed", ("e-", "e+"), ("mu-", "mu+"), "sqrt_s = 10.0",
                "[integration]\nconsistency_min_q = 1.0\niterations = 3", "events = 100\nweighted_events = 0")
    # Q < 1 always, so a threshold of 1 must warn
    with pytest.warns(ConsistencyWarning, match="integration.consistency_min_q"):
        gen.run(parse_card(text, "w.toml"), folder=tmp_path)


def test_weighted_only_and_zero_event_runs(tmp_path):
    text = card("qed", ("e-", "e+"), ("mu-", "mu+"), "sqrt_s = 10.0", "", "events = 0\nweighted_events = 1000")
    res = gen.run(parse_card(text, "w.toml"), folder=tmp_path)
    assert [f.name for f in res.files] == ["weighted.parquet"] and res.unweighting is None


def test_progress_draws_on_a_terminal_and_is_silent_otherwise():
    s = io.StringIO()
    p = Progress(enabled=True, stream=s)
    p.stage("adapt", 10)
    p.update(5, "half")
    p.end("done")
    out = s.getvalue()
    assert "adapt" in out and "100.0%" in out and "done" in out and out.endswith("\n")
    quiet = io.StringIO()
    q = Progress(stream=quiet)  # StringIO is not a terminal
    q.stage("adapt", 10)
    q.end("done")
    assert quiet.getvalue() == ""


def test_the_chi2_tail_against_scipy_special():
    """gen's closed-form chi-square survival function against scipy.special.gammaincc (the
    regularized upper incomplete gamma function), dof 1..60, to 1e-12 relative."""
    from scipy.special import gammaincc

    from gen.sampling.sampler import chi2_survival

    for dof in range(1, 61):
        for chi2 in np.concatenate([np.linspace(0.0, 5.0 * dof + 20.0, 40), [1e-9, 0.5]]):
            ref = gammaincc(dof / 2, chi2 / 2)
            if ref > 1e-250:
                assert chi2_survival(float(chi2), dof) == pytest.approx(ref, rel=1e-12, abs=0), (dof, chi2)


def test_the_excess_bounded_maximum_weight():
    """The bound is the lowest weight whose excess sum(w - bound) over the larger weights stays
    within the allowance (its definition; checked here by brute force over every candidate)."""
    from gen.sampling.sampler import bounded_maximum
    rng = np.random.default_rng(5)
    w = rng.pareto(1.5, 3000) + 1.0
    assert bounded_maximum(w, 0.0) == w.max()
    for share in (1e-4, 1e-3, 1e-2):
        allowed = share * w.sum()
        bound = bounded_maximum(w, allowed)
        excess = np.clip(w - bound, 0, None).sum()
        assert excess <= allowed
        lower = np.sort(w[w < bound])
        assert lower.size == 0 or np.clip(w - lower[-1], 0, None).sum() > allowed
    # one outlier does not set the bound when the allowance covers it
    w2 = np.concatenate([np.ones(100000), [50.0]])
    assert bounded_maximum(w2, 1e-3 * w2.sum()) == 1.0
