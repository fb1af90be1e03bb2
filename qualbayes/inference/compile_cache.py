"""Chains over CPU devices with the data as inputs, so that compiled samplers are reusable.

numpyro's ``chain_method="parallel"`` maps the chains with ``pmap`` over a function that
has the model's arguments (the data) bound in, so jax embeds the data in the compiled
program as constants: every new data set of the same shape compiles the whole sampler again,
and the persistent compilation cache (keyed by the program) never serves another file, nor
what ``qualbayes prepare`` compiled. :func:`chain_runner` gives numpyro a chain method that
does the same ``pmap`` with the data passed as (unmapped) inputs instead: one compiled
sampler per shape and setting, served from the cache to any data of that shape (measured:
two data sets of one shape, second run a cache hit, bench/bench_first_run.py and
tests/test_first_run.py). The draws equal the built-in method's up to floating-point
rounding (constants folded by the compiler against inputs).

``run_nuts`` no longer goes through numpyro's ``MCMC``: it keeps one sampler per shape in
the process (:mod:`qualbayes.inference.nuts_program`, the same data-as-inputs mapping). This
chain method stays for code that runs numpyro's ``MCMC`` itself (the reference in
tests/test_first_run.py).

Imports jax when called: only the sampler path uses it.
"""

from __future__ import annotations

import functools

_DATA_KEYWORDS = ("args", "kwargs")


def chain_runner(method: str):
    """The ``chain_method`` to give numpyro for ``method``: "parallel" becomes
    :func:`pmap_with_inputs`; any other method is returned unchanged."""
    return pmap_with_inputs if method == "parallel" else method


def pmap_with_inputs(chain_fn):
    """numpyro calls ``chain_method(chain_fn)(map_args)``; ``chain_fn`` is a partial with the
    model's ``args`` and ``kwargs`` bound. Map over the chains with those as inputs shared
    by every device. If numpyro's calling convention ever changes, fall back to the plain
    pmap (the built-in behaviour)."""
    import jax  # noqa: PLC0415

    keywords = getattr(chain_fn, "keywords", None)
    if not (isinstance(chain_fn, functools.partial) and keywords
            and all(k in keywords for k in _DATA_KEYWORDS)):
        return jax.pmap(chain_fn)
    fixed = {k: v for k, v in keywords.items() if k not in _DATA_KEYWORDS}
    inner = chain_fn.func

    def one_chain(map_args, args, kwargs):
        return inner(*chain_fn.args, map_args, args=args, kwargs=kwargs, **fixed)

    mapped = jax.pmap(one_chain, in_axes=(0, None, None))

    def run(map_args):
        return mapped(map_args, keywords["args"], keywords["kwargs"])

    return run
