"""The whole-number search every plan and extra-units count rests on, against brute force."""

import pytest

from qualbayes.search import smallest_int


@pytest.mark.parametrize("threshold", [0, 1, 2, 3, 7, 8, 9, 100, 1023, 1024, 1025, 99_999])
@pytest.mark.parametrize("lo", [0, 1, 5])
def test_smallest_int_matches_brute_force(threshold, lo):
    calls = []

    def ok(n):
        calls.append(n)
        return n >= threshold

    expected = max(threshold, lo)
    assert smallest_int(ok, lo, cap=10**6) == expected
    assert len(calls) <= 2 * (expected.bit_length() + 2)  # logarithmic, not a scan


def test_smallest_int_cap_and_empty_range():
    assert smallest_int(lambda n: n >= 50, 0, cap=49) is None
    assert smallest_int(lambda n: n >= 50, 0, cap=50) == 50
    assert smallest_int(lambda n: True, 10, cap=5) is None
