"""docs/api.md is a doctest: every example of the Python walk-through runs as shown."""

from __future__ import annotations

import doctest
from pathlib import Path

import pytest

DOC = Path(__file__).resolve().parent.parent / "docs" / "api.md"


@pytest.mark.filterwarnings("ignore::DeprecationWarning")  # arviz plotting on matplotlib 3.11
def test_the_python_walk_through_runs_as_written():
    result = doctest.testfile(str(DOC), module_relative=False, report=True,
                              optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE)
    assert result.attempted > 30
    assert result.failed == 0
