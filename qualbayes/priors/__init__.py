"""Priors an auditor can follow: stated in the engineer's words, borrowed from earlier data
with a stated weight, and checked for how much the decision depends on them.

From Python::

    from qualbayes.priors import Beta, Gamma, LogNormal, from_statements, power, sensitivity
    prior = from_statements("p<0.5%@90%")          # a Beta meeting the statement exactly
    borrowed = power((2, 500), 0.5)                 # earlier 2 in 500 at weight 0.5
    table = sensitivity(result)                     # the result rerun under a set of priors

Modules, one job each (scipy only, except ``life_sensitivity``):
  distributions     the prior protocol: Beta, BetaMixture, Gamma, LogNormal (scipy.stats)
  statements        parse "p<0.5%@90%"-style statements into quantile constraints
  elicit            a Beta, lognormal or gamma prior that meets one or two statements exactly
  build             from_statements and power: prior objects from Python
  power_prior       the power prior (Ibrahim & Chen 2000): earlier data at a weight in [0, 1]
  predictive        what data each prior expects (prior predictive ranges)
  prior_set         the prior set, and the lots question rerun under it (closed forms)
  plan_sensitivity  the plan questions rerun under it
  compare           sensitivity(question, priors): a result rerun, as a tidy frame
  setups            the analysis prior from statements and earlier data, with its words
  evidence          the prior keys of a run record (words, predictive, sensitivity)
  life_sensitivity  the same for the Weibull life model (NUTS; imports jax)

Importing this package imports nothing heavy; the names below load their module on use.
"""

_LAZY = {
    "Prior": "distributions", "Beta": "distributions", "BetaMixture": "distributions",
    "Gamma": "distributions", "LogNormal": "distributions",
    "from_statements": "build", "power": "build", "sensitivity": "compare",
}


def __getattr__(name: str):
    if name in _LAZY:
        import importlib  # noqa: PLC0415

        return getattr(importlib.import_module(f"qualbayes.priors.{_LAZY[name]}"), name)
    raise AttributeError(f"module 'qualbayes.priors' has no attribute {name!r}")


__all__ = list(_LAZY)
