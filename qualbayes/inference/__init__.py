"""Running samplers and judging their draws, one concept a module:

* :mod:`qualbayes.inference.run` — NUTS through numpyro, scoped jax settings, InferenceData
  (imports jax only inside its functions);
* :mod:`qualbayes.inference.gate` — the convergence gate (R-hat, ESS, divergences);
* :mod:`qualbayes.inference.diagnostics` — rank-normalised R-hat and ESS in numpy;
* :mod:`qualbayes.inference.mcse` — Monte Carlo error of a probability and the too-close rule.

Importing this package imports none of jax, numpyro or arviz.
"""
