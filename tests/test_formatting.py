"""The shared text formatters (layers.formatting).

Expected strings are the forms the reports and ``layers list`` printed before
the formatters were merged into one (``7 d``, ``90 min``, ``1.51 h``), written
out by hand: a change of output is a change a user sees, so it must fail here.
"""

from __future__ import annotations

import doctest

import pytest

from layers import formatting
from layers.formatting import format_duration


@pytest.mark.parametrize(
    "seconds,text",
    [
        (7 * 86400.0, "7 d"),
        (86400.0, "1 d"),
        (36 * 3600.0, "36 h"),  # no whole number of days: the next unit down
        (3600.0, "1 h"),
        (5400.0, "90 min"),
        (600.0, "10 min"),
        (45.0, "45 s"),
        (0.5, "0.5 s"),
        (0.0, "0 s"),
        (-3600.0, "-3600 s"),  # negative: in seconds, sign kept
        (5430.0, "5430 s"),  # no whole number of minutes: every second shown
        (86400.0 + 1e-6, "1 d"),  # within the 1e-9 relative round-off of a whole unit
    ],
)
def test_exact_form(seconds, text):
    assert format_duration(seconds) == text


@pytest.mark.parametrize(
    "seconds,text",
    [
        (5430.0, "1.51 h"),  # an hour or more, no whole minute: three digits in hours
        (90061.0, "25 h"),  # 25.017 h to three digits
        (3599.5, "3599.5 s"),  # under an hour: still seconds
        (7 * 86400.0, "7 d"),  # whole units are unchanged
        (5400.0, "90 min"),
    ],
)
def test_approximate_form(seconds, text):
    assert format_duration(seconds, approximate=True) == text


def test_docstring_examples():
    result = doctest.testmod(formatting)
    assert result.attempted >= 2 and result.failed == 0
