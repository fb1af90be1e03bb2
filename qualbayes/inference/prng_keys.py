r"""jax's random keys computed in numpy, bit for bit, without compiling a program.

jax's default generator is Threefry-2x32 with 20 rounds (Salmon, Moraes, Dror & Shaw 2011,
"Parallel random numbers: as easy as 1, 2, 3", SC'11; rotation constants 13, 15, 26, 6 and
17, 29, 16, 24, key-schedule parity 0x1BD11BDA). A key is two uint32 words, and

* ``PRNGKey(seed)`` is the seed's 64 bits as (high word, low word);
* ``fold_in(key, j)`` is the hash of the counter pair (0, j mod 2^32) under the key;
* ``split(key, m)`` (jax's default "partitionable" form) is the hash of the counter pairs
  (0, i), i = 0..m-1: key i is the pair of output words at i.

The samplers need only these few keys per run. Computed by jax each of them is a compiled
program (on a first-ever run a compilation of about half a second, and on every run a
lowering of up to 0.3 s); here they are a few dozen numpy operations. :func:`available`
says whether jax's settings are the ones this module reproduces (the default generator,
partitionable keys, raw uint32 keys); callers use jax otherwise. The tests compare every
function with jax's own for many seeds and counters.

>>> split(seed_key(0), 2)  # jax.random.split(jax.random.PRNGKey(0), 2)
array([[1797259609, 2579123966],
       [ 928981903, 3453687069]], dtype=uint32)
"""

from __future__ import annotations

import numpy as np

_ROTATIONS = ((13, 15, 26, 6), (17, 29, 16, 24))
_PARITY = np.uint32(0x1BD11BDA)


def threefry2x32(key: np.ndarray, x0: np.ndarray, x1: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The Threefry-2x32 hash (20 rounds) of the counter pairs (x0, x1) under ``key``
    (two uint32 words); uint32 arithmetic modulo 2^32."""
    k = [np.uint32(key[0]), np.uint32(key[1])]
    ks = [k[0], k[1], k[0] ^ k[1] ^ _PARITY]
    x0 = np.array(x0, dtype=np.uint32, ndmin=1)
    x1 = np.array(x1, dtype=np.uint32, ndmin=1)
    with np.errstate(over="ignore"):
        x0 = x0 + ks[0]
        x1 = x1 + ks[1]
        for i in range(5):
            for r in _ROTATIONS[i % 2]:
                x0 = x0 + x1
                x1 = (x1 << np.uint32(r)) | (x1 >> np.uint32(32 - r))
                x1 = x0 ^ x1
            x0 = x0 + ks[(i + 1) % 3]
            x1 = x1 + ks[(i + 2) % 3] + np.uint32(i + 1)
    return x0, x1


def seed_key(seed: int) -> np.ndarray:
    """``jax.random.PRNGKey(seed)`` for a seed in the int64 range: (high, low) words."""
    bits = int(np.int64(seed)) & 0xFFFFFFFFFFFFFFFF  # OverflowError outside int64, as jax
    return np.array([bits >> 32, bits & 0xFFFFFFFF], dtype=np.uint32)


def fold_in(key: np.ndarray, data: int) -> np.ndarray:
    """``jax.random.fold_in(key, data)`` (data taken modulo 2^32, as jax converts it)."""
    o0, o1 = threefry2x32(key, [0], [int(data) & 0xFFFFFFFF])
    return np.array([o0[0], o1[0]], dtype=np.uint32)


def split(key: np.ndarray, num: int) -> np.ndarray:
    """``jax.random.split(key, num)``: (num, 2) uint32."""
    o0, o1 = threefry2x32(key, np.zeros(num, np.uint32), np.arange(num, dtype=np.uint32))
    return np.stack([o0, o1], axis=1)


def available() -> bool:
    """Whether jax's random settings are those reproduced here (import jax first)."""
    import jax  # noqa: PLC0415

    c = jax.config
    return (c.jax_default_prng_impl == "threefry2x32" and bool(c.jax_threefry_partitionable)
            and not bool(c.jax_enable_custom_prng))
