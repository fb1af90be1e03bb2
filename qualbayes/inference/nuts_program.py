"""One compiled NUTS sampler per model, data shape and sampler setting, kept in the process.

numpyro's ``MCMC.run`` maps its chains over a new function object on every run, so every fit
traced, lowered and loaded (or compiled) the whole sampler again, even a second fit of the
same shape in the same process; and a first run (warmup and draws in one loop) and its
continuation (draws only) were two programs, each compiling the NUTS transition. Here the
sampler is two programs, built once per :func:`program_for` key and kept in the process:

- ``init``: numpyro's ``NUTS.init`` for every chain (initial point, step-size search,
  adaptation state), from the chain's random key;
- ``steps``: up to :data:`CHUNK` NUTS transitions from a state, collecting the constrained
  sites (as numpyro's postprocessing gives them) and the divergences. Warmup adaptation is
  inside the transition (it follows the iteration counter of the state), so warmup, draws
  and every later continuation are calls of this one program.

The first use of a program compiles both at once (:meth:`Program.compiled`: ``steps`` is
lowered first and compiles while ``init`` is lowered; each compilation on a thread of its
own), so a first-ever run waits for the longer compilation rather than the sum.

The chains are mapped with ``pmap`` over CPU devices (``parallel``), a ``vmap``
(``vectorized``) or ``lax.map`` (``sequential``), with the model's arguments (the data) as
unmapped inputs: one compiled sampler serves any data of the same shape, in this process and
from the persistent compilation cache.

The algorithm and the random streams are numpyro's own: the chain keys are
``split(PRNGKey(seed), chains)`` (one chain: the key itself), each chain is initialised by
the kernel's ``init`` and advanced by its ``sample``, exactly as ``MCMC.run`` does; only the
loop is cut into calls (tests/test_first_run.py compares the draws with ``MCMC.run``).

Imports jax and numpyro: only the sampler paths import this.
"""

from __future__ import annotations

import functools
from collections import OrderedDict
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field

import numpy as np

#: transitions per call of the ``steps`` program (any count is run in calls of at most this)
CHUNK = 500
#: programs kept in the process (least recently used dropped first)
KEEP = 8

_PROGRAMS: OrderedDict = OrderedDict()


@dataclass
class Program:
    """The compiled sampler of one key: ``init`` and ``steps`` (see the module text)."""

    init: object
    steps: object
    num_chains: int
    uses: int = 0
    #: argument types -> (init, steps) compiled ahead of time for them (:meth:`compiled`)
    ready: dict = field(default_factory=dict)
    #: (state, model arguments) types -> the compiled ``steps`` that takes them
    steps_for: dict = field(default_factory=dict)

    def start(self, seed: int, model_args: tuple, init_params=None):
        """Every chain's initial state (numpyro's keys and ``NUTS.init``)."""
        keys = chain_keys(seed, self.num_chains)
        init, _ = self.compiled(keys, init_params, model_args)
        return init(keys, init_params, model_args)

    def compiled(self, keys, init_params, model_args) -> tuple:
        """(init, steps) compiled for these arguments' types. The first time, ``steps`` is
        lowered first (its state's types by ``eval_shape`` of ``init``) and each is compiled
        on a thread of its own as soon as it is lowered: XLA releases the interpreter lock
        while it compiles or loads from the persistent cache, so ``init`` is lowered while
        ``steps`` compiles, and a first-ever run waits for the longer compilation, not the
        sum. They are the programs a plain call compiles, so the draws do not change
        (tests/test_first_run.py compares them with ``MCMC.run``)."""
        import jax  # noqa: PLC0415
        import jax.numpy as jnp  # noqa: PLC0415

        sig = _types((keys, init_params, model_args))
        if sig not in self.ready:
            with ThreadPoolExecutor(2) as pool:
                state = jax.eval_shape(self.init, keys, init_params, model_args)
                count = jax.ShapeDtypeStruct((), jnp.int32)
                steps = pool.submit(self.steps.lower(state, model_args, count).compile)
                init = pool.submit(self.init.lower(keys, init_params, model_args).compile)
                self.ready[sig] = (init.result(), steps.result())
                self.steps_for[_types((state, model_args))] = self.ready[sig][1]
        return self.ready[sig]

    def advance(self, state, model_args: tuple, count: int, keep: bool = True):
        """``count`` transitions from ``state``: (last state, sites {name: (chain, count,
        ...)}, diverging (chain, count)); with ``keep=False`` (warmup) nothing is collected
        and the sites and divergences are None."""
        import jax.numpy as jnp  # noqa: PLC0415

        parts, divs, done = [], [], 0
        steps = self.steps_for.get(_types((state, model_args)), self.steps)  # else: plain
        while done < count:
            n = min(CHUNK, count - done)
            state, sites, div = steps(state, model_args, jnp.asarray(n, jnp.int32))
            if keep:
                parts.append({k: np.asarray(v)[:, :n] for k, v in sites.items()})
                divs.append(np.asarray(div)[:, :n])
            done += n
        if not keep:
            return state, None, None
        if not parts:
            raise ValueError("no draws asked for")
        sites = {k: np.concatenate([p[k] for p in parts], axis=1) for k in parts[0]}
        return state, sites, np.concatenate(divs, axis=1)


def chain_keys(seed: int, num_chains: int):
    """The chains' keys: ``jax.random.split(jax.random.PRNGKey(seed), num_chains)`` (the
    seed's key itself for one chain), computed in numpy with the same bits when jax's random
    settings allow (:mod:`qualbayes.inference.prng_keys`; no program to lower or compile)."""
    import jax  # noqa: PLC0415

    from qualbayes.inference import prng_keys  # noqa: PLC0415

    if prng_keys.available():
        key = prng_keys.seed_key(seed)
        return key[None] if num_chains == 1 else prng_keys.split(key, num_chains)
    key = jax.random.PRNGKey(seed)
    return key[None] if num_chains == 1 else jax.random.split(key, num_chains)


def _types(tree) -> tuple:
    """The tree's structure and each leaf's (shape, dtype, weak type): what a program
    compiled ahead of time requires of its arguments."""
    import jax  # noqa: PLC0415

    leaves, treedef = jax.tree.flatten(tree)
    types = (a if isinstance(a, jax.ShapeDtypeStruct) else jax.typeof(a) for a in leaves)
    return treedef, tuple((tuple(t.shape), str(t.dtype), bool(t.weak_type)) for t in types)


def program_for(model, model_args: tuple, *, num_chains: int, num_warmup: int,
                target_accept: float, max_tree_depth: int, method: str,
                init_params=None) -> Program:
    """The kept program for this model, argument shapes and settings (built on first use).
    A model that cannot be a dictionary key (a closure over unhashable values) gets a new
    program, as before."""
    key = _key(model, model_args, num_chains, num_warmup, target_accept, max_tree_depth,
               method, init_params)
    if key is not None and key in _PROGRAMS:
        _PROGRAMS.move_to_end(key)
        program = _PROGRAMS[key]
    else:
        program = _build(model, num_chains, num_warmup, target_accept, max_tree_depth,
                         method, init_params is not None)
        if key is not None:
            _PROGRAMS[key] = program
            while len(_PROGRAMS) > KEEP:
                _PROGRAMS.popitem(last=False)
    program.uses += 1
    return program


def forget() -> None:
    """Drop every kept program (their compiled code is released with jax's caches)."""
    _PROGRAMS.clear()


def kept() -> int:
    """How many programs the process keeps (for tests and benchmarks)."""
    return len(_PROGRAMS)


def _hashable(value):
    """``value`` as a dictionary key part, or TypeError."""
    if isinstance(value, functools.partial):
        return ("partial", _hashable(value.func), tuple(_hashable(a) for a in value.args),
                tuple(sorted((k, _hashable(v)) for k, v in value.keywords.items())))
    hash(value)
    return value


def _key(model, model_args, num_chains, num_warmup, target_accept, max_tree_depth, method,
         init_params):
    import jax  # noqa: PLC0415

    try:
        model_key = _hashable(model)
    except TypeError:
        return None
    leaves, tree = jax.tree.flatten(model_args)
    shapes = tuple((np.shape(a), str(jax.numpy.result_type(a))) for a in leaves)
    init = None
    if init_params is not None:
        init_leaves, init_tree = jax.tree.flatten(init_params)
        init = (init_tree, tuple((np.shape(a), str(jax.numpy.result_type(a)))
                                 for a in init_leaves))
    return (model_key, tree, shapes, int(num_chains), int(num_warmup), float(target_accept),
            int(max_tree_depth), method, init, bool(jax.config.jax_enable_x64))


def _build(model, num_chains, num_warmup, target_accept, max_tree_depth, method,
           has_init) -> Program:
    import jax  # noqa: PLC0415
    import jax.numpy as jnp  # noqa: PLC0415
    from numpyro.infer import NUTS  # noqa: PLC0415

    kernel = NUTS(model, target_accept_prob=target_accept, max_tree_depth=max_tree_depth)

    def init_one(key, init_params, args):
        return kernel.init(key, num_warmup, init_params, model_args=args, model_kwargs={})

    def steps_one(state, args, n):
        post = kernel.postprocess_fn(args, {})
        proto = post(state.z)
        sites = jax.tree.map(lambda v: jnp.zeros((CHUNK, *jnp.shape(v)), jnp.result_type(v)),
                             proto)
        div = jnp.zeros((CHUNK,), bool)

        def body(i, carry):
            st, sites, div = carry
            st = kernel.sample(st, args, {})
            sites = jax.tree.map(lambda b, v: b.at[i].set(v), sites, post(st.z))
            return st, sites, div.at[i].set(st.diverging)

        return jax.lax.fori_loop(0, n, body, (state, sites, div))

    init_axes = (0, 0 if has_init else None, None)
    steps_axes = (0, None, None)
    return Program(_mapped(init_one, init_axes, method, num_chains),
                   _mapped(steps_one, steps_axes, method, num_chains), num_chains)


def _mapped(fn, in_axes, method: str, num_chains: int):
    """``fn`` of one chain mapped over the chains (axis 0 of the arguments marked 0)."""
    import jax  # noqa: PLC0415

    if method == "parallel" and num_chains > 1:
        return jax.pmap(fn, in_axes=in_axes)
    if method == "sequential" and num_chains > 1:
        def over_chains(*args):
            mapped = [a for a, axis in zip(args, in_axes, strict=True) if axis == 0]

            def one(xs):
                it = iter(xs)
                return fn(*(next(it) if axis == 0 else a
                            for a, axis in zip(args, in_axes, strict=True)))

            return jax.lax.map(one, mapped)

        return jax.jit(over_chains)
    return jax.jit(jax.vmap(fn, in_axes=in_axes))
