import os
from pathlib import Path

import pytest

os.environ.setdefault("CI", "true")  # numpyro: no progress bars in tests

ROOT = Path(__file__).resolve().parent.parent
EXAMPLES = ROOT / "example_lots"


@pytest.fixture
def examples() -> Path:
    return EXAMPLES
