"""jax's random keys computed in numpy (qualbayes.inference.prng_keys).

Reference: jax.random itself (PRNGKey, fold_in, split: the reference library whose bits
the samplers' keys must equal) and the Threefry-2x32 definition (Salmon et al. 2011,
docs/references.md).
"""

from __future__ import annotations

import numpy as np
import pytest

from qualbayes.inference import prng_keys

SEEDS = [0, 1, 7, 12_345, 2**31, 2**32 + 3, 2**40 + 7, -1, -5, 2**63 - 1, -(2**63)]


def _jax():
    import jax

    from qualbayes.inference.run import setup_jax

    setup_jax()
    return jax


@pytest.mark.parametrize("seed", SEEDS)
def test_keys_equal_jax_bit_for_bit(seed):
    jax = _jax()
    assert prng_keys.available()
    key = prng_keys.seed_key(seed)
    np.testing.assert_array_equal(key, np.asarray(jax.random.PRNGKey(seed)))
    for num in (1, 2, 4, 5, 9):
        np.testing.assert_array_equal(prng_keys.split(key, num),
                                      np.asarray(jax.random.split(jax.random.PRNGKey(seed), num)))
    for j in (0, 1, 2, 999, 2**31, 2**32 - 1):
        np.testing.assert_array_equal(
            prng_keys.fold_in(key, j), np.asarray(jax.random.fold_in(jax.random.PRNGKey(seed), j)))


def test_chain_keys_equal_the_jax_path(monkeypatch):
    from qualbayes.inference import nuts_program

    _jax()
    for chains in (1, 4):
        numpy_keys = nuts_program.chain_keys(11, chains)
        monkeypatch.setattr(prng_keys, "available", lambda: False)
        jax_keys = nuts_program.chain_keys(11, chains)
        monkeypatch.undo()
        assert isinstance(numpy_keys, np.ndarray) and not isinstance(jax_keys, np.ndarray)
        np.testing.assert_array_equal(numpy_keys, np.asarray(jax_keys))


def test_seeds_outside_int64_are_refused_as_jax_refuses_them():
    with pytest.raises(OverflowError):
        prng_keys.seed_key(2**63)


def test_other_random_settings_fall_back_to_jax():
    jax = _jax()
    jax.config.update("jax_threefry_partitionable", False)
    try:
        assert not prng_keys.available()
    finally:
        jax.config.update("jax_threefry_partitionable", True)
    assert prng_keys.available()
