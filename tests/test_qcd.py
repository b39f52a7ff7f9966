"""Massless QCD 2->2 |M|^2 against `equation-database` (Ellis, Stirling & Webber, Table 7.1)."""

from __future__ import annotations

import numpy as np
import pytest
import sympy

from gen.physics.matrix.qcd import CHANNELS

esw = pytest.importorskip("equation_database.isbn_9780511628788")

NAMES = {
    "qq'->qq'": "quark_quarkprime_to_quark_quarkprime", "qq->qq": "quark_quark_to_quark_quark",
    "qqbar->q'qbar'": "quark_quarkbar_to_quarkprime_quarkprimebar", "qqbar->qqbar": "quark_quarkbar_to_quark_quarkbar",
    "qqbar->gg": "quark_quarkbar_to_gluon_gluon", "gg->qqbar": "gluon_gluon_to_quark_quarkbar",
    "gq->gq": "gluon_quark_to_gluon_quark", "gg->gg": "gluon_gluon_to_gluon_gluon",
}

#: ESW Table 7.1, the 90-degree column (shared check values, confirmed)
AT_90 = {"qq'->qq'": 2.22, "qq->qq": 3.26, "qqbar->q'qbar'": 0.22, "qqbar->qqbar": 2.59, "qqbar->gg": 1.04,
         "gg->qqbar": 0.15, "gq->gq": 6.11, "gg->gg": 30.4}


@pytest.mark.parametrize("name", list(CHANNELS))
def test_channel_against_equation_database(name):
    rng = np.random.default_rng(7)
    s = 10 ** rng.uniform(1, 6, 300)
    c = rng.uniform(-0.99, 0.99, 300)
    t, u = -0.5 * s * (1 - c), -0.5 * s * (1 + c)
    ref = sympy.lambdify((esw.s, esw.t, esw.u), esw.table_7_1[NAMES[name]], "numpy")(s, t, u)
    np.testing.assert_allclose(CHANNELS[name](s, t, u), ref, rtol=1e-12)


@pytest.mark.parametrize("name", list(CHANNELS))
def test_channel_at_90_degrees_against_the_printed_table(name):
    s = 1.0
    assert CHANNELS[name](s, -0.5, -0.5) == pytest.approx(AT_90[name], abs=0.006 * max(1, AT_90[name]))
