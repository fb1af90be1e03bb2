"""Library calls leave the process as they found it: importing qualbayes and running a lot
history fit and a life fit (both NUTS) changes neither jax_enable_x64, jax_platforms nor
XLA_FLAGS. Run in a fresh interpreter, because the test session itself is configured the
way the command line configures its process. The same run checks that ``seed`` wins over
``settings.seed`` and that the results carry InferenceData with named dimensions."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent

SCRIPT = r"""
import json, os
import jax
before = (jax.config.jax_enable_x64, jax.config.jax_platforms, os.environ.get("XLA_FLAGS"))
import numpy as np, pandas as pd
import qualbayes as qb
from qualbayes.inference.run import SamplerSettings
rng = np.random.default_rng(4)
n = rng.choice([80, 125, 200], size=10)
lots = pd.DataFrame({"lot": [f"L{i}" for i in range(10)], "part": ["1"] * 5 + ["X[1"] * 5,
                     "inspected": n, "defectives": rng.binomial(n, 0.02)})
fast = SamplerSettings(num_warmup=300, num_samples=300, seed=5)
lot = qb.assess_lots(lots, spec="3%", prior="history", seed=7, settings=fast)
after_lots = (jax.config.jax_enable_x64, jax.config.jax_platforms, os.environ.get("XLA_FLAGS"))
t = np.sort(rng.weibull(2.0, 12) * 1000)
life = pd.DataFrame({"unit": [f"u{i}" for i in range(12)], "time": t,
                     "status": ["F"] * 8 + ["S"] * 4})
res = qb.assess_life(life, mission=200, target=0.9, settings=fast)
after = (jax.config.jax_enable_x64, jax.config.jax_platforms, os.environ.get("XLA_FLAGS"))
print(json.dumps({
    "before": before, "after_lots": after_lots, "after": after, "lot_seed": lot.seed,
    "parts": list(lot.diagnostics), "lot_dims": list(lot.idata.posterior["mu"].dims),
    "lot_coords": [str(v) for v in lot.idata.posterior["part"].values],
    "has_diverging": "diverging" in lot.idata.sample_stats,
    "observed": list(lot.idata.observed_data.data_vars),
    "life_dims": list(res.idata.posterior["log_shape"].dims),
    "life_gate": sorted({p["name"].split("[")[0]
                         for p in res.groups[0]["diagnostics"]["parameters"]}),
    "life_frame": res.to_frame()[["group", "decision"]].values.tolist(),
}))
"""


def test_library_calls_leave_the_jax_configuration_alone():
    env = {k: v for k, v in os.environ.items()
           if not k.startswith(("JAX_", "XLA_"))}
    env["PYTHONPATH"] = str(ROOT)
    cache = os.environ.get("QUALBAYES_JAX_CACHE")
    if cache and cache.lower() != "off":  # the user's own jax setting, not one the test checks
        env["JAX_COMPILATION_CACHE_DIR"] = cache
    out = subprocess.run([sys.executable, "-c", SCRIPT], capture_output=True, text=True,
                         env=env, timeout=600, cwd=ROOT)
    assert out.returncode == 0, out.stderr[-3000:]
    got = json.loads(out.stdout.strip().splitlines()[-1])
    assert got["before"] == [False, None, None]
    assert got["after_lots"] == got["before"] and got["after"] == got["before"]
    assert got["lot_seed"] == 7  # seed wins over settings.seed
    assert got["parts"] == ["1", "X[1"]
    assert got["lot_dims"] == ["chain", "draw", "part"] and got["lot_coords"] == ["1", "X[1"]
    assert got["has_diverging"] and got["observed"] == ["defectives", "inspected"]
    assert got["life_dims"] == ["chain", "draw", "group"]
    assert got["life_gate"] == ["log_scale", "log_shape"]
    assert got["life_frame"][0][1] in ("meets", "does-not-meet", "undecided")
