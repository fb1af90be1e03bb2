"""Demonstration test planning and sampling plans, classical and Bayesian (scipy only).

Modules, one job each:
  attribute   pass/fail demonstration: success run, c-failure binomial, Beta-prior plans
  weibull     binomial test with the test time scaled by an assumed Weibull shape (known
              shape or shape range)
  mtbf        constant failure rate tests: chi-square and gamma-prior test times
  assurance   prior-predictive probability of passing; smallest plan for a wanted assurance
  sampling    single sampling plans (n, c) for AQL/alpha and LTPD/beta; OC; accepted lots
  priors      Beta-mixture priors on a failure probability
  history     a prior learned from a lot history (the only path that imports jax, lazily)
  plans       the questions as the engineer asks them, answered as plan records

Importing this package does not import jax.
"""

from qualbayes.planning.assurance import (
    attribute_assurance,
    life_assurance,
    mtbf_assurance,
    smallest_attribute_plan,
    smallest_life_plan,
    smallest_mtbf_plan,
)
from qualbayes.planning.attribute import (
    bayes_units,
    lower_reliability_bound,
    success_run_units,
    units_for_failures,
)
from qualbayes.planning.mtbf import (
    GammaPrior,
    bayes_test_time,
    chi2_factor,
    classical_test_time,
    posterior_mtbf,
)
from qualbayes.planning.plans import plan_attribute, plan_life, plan_mtbf, plan_sampling
from qualbayes.planning.rate_prior import RatePrior
from qualbayes.planning.sampling import (
    SamplingPlan,
    acceptance_probability,
    accepted_lot_quality,
    find_plan,
)
from qualbayes.planning.weibull import ShapePrior, time_ratio, units_needed

__all__ = [
    "GammaPrior", "RatePrior", "SamplingPlan", "ShapePrior", "acceptance_probability",
    "accepted_lot_quality", "attribute_assurance", "bayes_test_time", "bayes_units",
    "chi2_factor", "classical_test_time", "find_plan", "life_assurance",
    "lower_reliability_bound", "mtbf_assurance", "plan_attribute", "plan_life", "plan_mtbf",
    "plan_sampling", "posterior_mtbf", "smallest_attribute_plan", "smallest_life_plan",
    "smallest_mtbf_plan", "success_run_units", "time_ratio", "units_for_failures",
    "units_needed",
]
