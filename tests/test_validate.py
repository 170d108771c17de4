"""The shared argument checks: each names the argument and says what it expected."""

from __future__ import annotations

import pytest

from sensormodel import validate
from sensormodel.errors import AnalysisError


@pytest.mark.parametrize("value", [0.5, "0.5", 1 / 2])
def test_probability_accepts_numbers_and_numeric_text(value):
    assert validate.probability(value, "power") == 0.5


@pytest.mark.parametrize(
    ("value", "problem", "expected"),
    [
        ("high", "got 'high'", "a probability between 0 and 1, e.g. 0.9"),
        (None, "got None", "a probability between 0 and 1, e.g. 0.9"),
        (1.0, "got 1.0", "a probability strictly between 0 and 1, e.g. 0.9"),
        (0, "got 0", "a probability strictly between 0 and 1, e.g. 0.9"),
        (True, "got nan", "a probability strictly between 0 and 1, e.g. 0.9"),
    ],
)
def test_probability_refusals_name_the_argument(value, problem, expected):
    with pytest.raises(AnalysisError) as info:
        validate.probability(value, "power")
    assert info.value.field == "power"
    assert info.value.problem == problem
    assert info.value.expected == expected


@pytest.mark.parametrize(
    ("value", "problem", "expected"),
    [
        ("fast", "got 'fast'", "a sample rate in Hz (a positive number)"),
        (-1.0, "got -1.0 Hz", "a finite sample rate > 0 Hz"),
        (float("inf"), "got inf Hz", "a finite sample rate > 0 Hz"),
        (False, "got nan Hz", "a finite sample rate > 0 Hz"),
    ],
)
def test_rate_refusals_name_the_argument(value, problem, expected):
    with pytest.raises(AnalysisError) as info:
        validate.rate(value, "--rate")
    assert info.value.field == "--rate"
    assert info.value.problem == problem
    assert info.value.expected == expected


def test_rate_accepts_numeric_text():
    assert validate.rate("200") == 200.0
