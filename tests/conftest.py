import os
from pathlib import Path

import pytest

os.environ.setdefault("CI", "true")  # numpyro: no progress bars in tests

from qualbayes.inference import configure_process  # noqa: E402

configure_process()  # as the command line does: tests call internals that assume it

ROOT = Path(__file__).resolve().parent.parent
EXAMPLES = ROOT / "example_lots"


@pytest.fixture
def examples() -> Path:
    return EXAMPLES
