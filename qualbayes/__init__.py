"""qualbayes: Bayesian lot acceptance and reliability decisions for quality engineers.

The API mirrors the command line:

* lots: ``read_lots(path)`` -> LotTable; ``assess_lots(table, spec, confidence, prior)``
* life: ``read_life(path)`` -> LifeTable; ``assess_life(table, mission, target, ...)``
* plans: ``plan_attribute``, ``plan_life``, ``plan_mtbf``, ``plan_sampling``

Importing this package does not import jax; the sampler is loaded only by the functions
that need it, and the life and plan functions are loaded on first use.
"""

from __future__ import annotations

__version__ = "0.1.0"

from qualbayes.acceptance import LotAssessment, assess_lots  # noqa: E402
from qualbayes.caution import CAUTION  # noqa: E402
from qualbayes.data.lots import LotTable, read_lots  # noqa: E402
from qualbayes.errors import InputError, OptionError  # noqa: E402
from qualbayes.questions import parse_probability, parse_rate  # noqa: E402

_LAZY = {
    "read_life": "qualbayes.data.life", "LifeTable": "qualbayes.data.life",
    "assess_life": "qualbayes.life_analysis", "LifeAssessment": "qualbayes.life_analysis",
    "plan_attribute": "qualbayes.planning", "plan_life": "qualbayes.planning",
    "plan_mtbf": "qualbayes.planning", "plan_sampling": "qualbayes.planning",
}


def __getattr__(name: str):
    if name in _LAZY:
        import importlib  # noqa: PLC0415

        return getattr(importlib.import_module(_LAZY[name]), name)
    raise AttributeError(f"module 'qualbayes' has no attribute {name!r}")


__all__ = [
    "CAUTION", "InputError", "LotAssessment", "LotTable", "OptionError", "assess_lots",
    "parse_probability", "parse_rate", "read_lots", "__version__", *_LAZY,
]
