"""qualbayes: Bayesian lot acceptance and reliability decisions for quality engineers.

The API mirrors the command line. Importing this package does not import jax; the
sampler is loaded only by the functions that need it.
"""

from __future__ import annotations

__version__ = "0.1.0"

from qualbayes.acceptance import LotAssessment, assess_lots  # noqa: E402
from qualbayes.caution import CAUTION  # noqa: E402
from qualbayes.data.lots import LotTable, read_lots  # noqa: E402
from qualbayes.errors import InputError, OptionError  # noqa: E402
from qualbayes.questions import parse_probability, parse_rate  # noqa: E402

__all__ = [
    "CAUTION", "InputError", "LotAssessment", "LotTable", "OptionError", "assess_lots",
    "parse_probability", "parse_rate", "read_lots", "__version__",
]
