"""The one frequency-list check: what it accepts, what it refuses, and the words it uses."""

from __future__ import annotations

import math

import pytest

from crosscheck.errors import CrosscheckError
from crosscheck.model.frequencies import FrequencyError, checked_frequencies, frequency_list


def test_sorted_and_each_point_once():
    """Sorted ascending; points equal within the vocabulary's frequency tolerance (1e-9 relative) merge."""
    got = frequency_list([1e3, 0, 50.0, 1e3 * (1 + 1e-12), 50], where="test")
    assert got == (0.0, 50.0, 1e3), "exact equality: the first of each run of equal points is kept"


def test_points_just_apart_stay_apart():
    """1e-6 relative apart is a different point (a dense sweep's spacing), so both are kept."""
    assert len(frequency_list([1e3, 1e3 * (1 + 1e-6)], where="test")) == 2


def test_order_and_duplicates_kept_by_the_plain_check():
    assert checked_frequencies(["10", 5, 5], where="test") == (10.0, 5.0, 5.0), "exact equality"


@pytest.mark.parametrize(("bad", "words"), [
    (-5.0, "-5 Hz is negative"),
    (math.nan, "nan Hz is not a finite number"),
    (math.inf, "inf Hz is not a finite number"),
    ("ten", "'ten' is not a number"),
    (None, "None is not a number"),
])
def test_refusals_name_the_origin_and_the_value(bad, words):
    with pytest.raises(FrequencyError) as info:
        frequency_list([1.0, bad], where="cases/x.toml: key 'frequencies'")
    message = str(info.value)
    assert message.startswith("cases/x.toml: key 'frequencies': "), message
    assert words in message, message
    assert "give" in message, "the message says what to write instead"
    assert isinstance(info.value, CrosscheckError) and isinstance(info.value, ValueError)


def test_an_empty_list_is_refused():
    with pytest.raises(FrequencyError, match="--freq: no frequencies given; give at least one"):
        frequency_list([], where="--freq")
