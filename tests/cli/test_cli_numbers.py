"""The CLI's one number formatter (Python's format mini-language is the reference: each case
is what ``format(x, spec)`` gives for the spec named)."""

from __future__ import annotations

import math

import pytest

from exposhift.cli.numbers import is_missing, number


@pytest.mark.parametrize(
    ("args", "kwargs", "expected"),
    [
        ((1.23456,), {}, "1.235"),  # '.3f'
        ((None,), {}, "n/a"),
        ((math.nan,), {"missing": "-"}, "-"),
        ((12345.678,), {"large": 1000}, "1.23e+04"),  # '.3g' at or above `large`
        ((999.5,), {"large": 1000}, "999.500"),
        ((0.0004,), {"style": "significant"}, "4.00e-04"),  # '.2e' below 0.001
        ((0.12345,), {"style": "significant"}, "0.123"),  # '.3g'
        ((True,), {"style": "significant"}, "yes"),
        (("convergent",), {"style": "significant"}, "convergent"),
        ((150.4, 0), {"large": 100}, "150"),  # '.0f'
    ],
)
def test_number(args, kwargs, expected):
    assert number(*args, **kwargs) == expected


def test_is_missing():
    assert is_missing(None) and is_missing(math.nan)
    assert not is_missing(0.0) and not is_missing("")
