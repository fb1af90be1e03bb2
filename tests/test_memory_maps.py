"""Many compilations in one process must not exhaust the system's memory mappings: each jax
compilation keeps mappings alive until its compiled code is dropped (measured in
qualbayes.inference.run.relieve_memory_maps); the guard drops it past half the limit."""

import pytest

from qualbayes.inference import run as inference


def test_the_guard_clears_only_past_its_share(monkeypatch):
    counts = inference._map_counts()
    if counts is None:
        pytest.skip("no /proc on this system")
    used, limit = counts
    assert 0 < used < limit
    assert inference.relieve_memory_maps(share=1.0) is False  # far below the limit
    cleared = []
    import jax

    monkeypatch.setattr(jax, "clear_caches", lambda: cleared.append(True))
    assert inference.relieve_memory_maps(share=used / limit / 2) is True
    assert cleared == [True]


def test_clearing_releases_the_mappings_of_compiled_code():
    import jax
    import jax.numpy as jnp

    if inference._map_counts() is None:
        pytest.skip("no /proc on this system")
    jax.clear_caches()
    before = inference._map_counts()[0]
    for k in range(1, 31):  # 30 distinct shapes: 30 compilations
        jax.jit(lambda x, k=k: jnp.sin(x) * k)(jnp.ones(k)).block_until_ready()
    grown = inference._map_counts()[0]
    jax.clear_caches()
    import gc

    gc.collect()
    after = inference._map_counts()[0]
    assert grown > before  # compilations hold mappings
    assert after < grown - (grown - before) / 2  # and clearing gives most of them back
