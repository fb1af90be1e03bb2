"""Priors an auditor can follow: stated in the engineer's words, borrowed from earlier data
with a stated weight, and checked for how much the decision depends on them.

Modules, one job each (all pure functions, scipy only, except ``life_sensitivity``):
  statements        parse "p<0.5%@90%"-style statements into quantile constraints
  elicit            a Beta, lognormal or gamma prior that meets one or two statements exactly
  power             the power prior (Ibrahim & Chen 2000): earlier data at a weight in [0, 1]
  predictive        what data each prior expects (prior predictive ranges)
  sensitivity       the question rerun under a fixed set of priors (closed forms)
  life_sensitivity  the same for the Weibull life model (NUTS; imports jax)

Importing this package imports nothing heavy.
"""
