import os
from pathlib import Path

import pytest

os.environ.setdefault("CI", "true")  # numpyro: no progress bars in tests

from qualbayes.inference.run import configure_process  # noqa: E402

configure_process()  # as the command line does: tests call internals that assume it

ROOT = Path(__file__).resolve().parent.parent
EXAMPLES = ROOT / "example_lots"


@pytest.fixture(autouse=True, scope="module")
def _release_compiled_code():
    """After each test module, drop jax's compiled code (it is reloaded from the persistent
    cache when needed): every compilation keeps about 30 memory mappings alive, and the whole
    suite compiles enough to reach the system's mapping limit (seen: LLVM aborting the run)."""
    yield
    import sys  # noqa: PLC0415

    if "jax" in sys.modules:
        import gc  # noqa: PLC0415

        sys.modules["jax"].clear_caches()
        gc.collect()


@pytest.fixture
def examples() -> Path:
    return EXAMPLES
