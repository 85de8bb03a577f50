"""The first-order budget of the global fit against the virtual class (Monte Carlo).

JCGM 101:2008 (propagation of distributions) is the reference for the first-order law of
JCGM 100:2008 eq. 10: where the model is near-linear the two agree. The virtual class refits
every trial with the global fit (planner.analysis.global_fit_batch, itself checked against
scipy.optimize.least_squares in tests/test_analysis.py).
"""

from __future__ import annotations

import numpy as np
import pytest

from planner.predict.montecarlo import simulate

TRIALS = 4000
# Relative standard error of a standard deviation from n trials is about 1/sqrt(2 n) (1.1 %
# at 4000); 6 % is five of them.
TOLERANCE = 0.06


@pytest.mark.parametrize("name", ["default_plan", "flask_plan", "piston_plan"])
def test_global_fit_u_K_and_u_eps_agree_with_the_virtual_class(name, request):
    plan = request.getfixturevalue(name)
    budget = plan.uncertainty
    assert budget is not None
    assert budget.global_fit_K is not None
    assert plan.global_fit is not None
    assert plan.global_fit.u_K == budget.global_fit_K.standard_uncertainty
    virtual = simulate(plan.inputs, plan.mixtures, trials=TRIALS, rng=np.random.default_rng(11))
    mc = virtual.global_fit
    assert budget.global_fit_K.standard_uncertainty == pytest.approx(mc.K.sd, rel=TOLERANCE)
    assert budget.global_fit_epsilon.standard_uncertainty == pytest.approx(
        mc.epsilon.sd, rel=TOLERANCE
    )
    # The fit returns the plan's constants from noise-free readings: no bias to first order,
    # and the class's mean lies within a few standard errors of it.
    assert mc.K.mean == pytest.approx(plan.global_fit.K, abs=5 * mc.K.standard_error + 1e-9)
    # Each contributor's share of the variance sums to one.
    shares = sum(c.share for c in budget.global_fit_K.contributors)
    assert shares == pytest.approx(1.0, rel=1e-9)
