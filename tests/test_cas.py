"""CAS Registry Numbers: check digits of published registry numbers.

Reference: CAS check-digit rule as published by Chemical Abstracts Service
(cas.org, "CAS Registry Number check digit verification"); the numbers below
are the published registry numbers of the substances named. Cross-checked
with the `chemicals` package from PyPI (chemicals.identifiers.check_CAS).
"""

from __future__ import annotations

import pytest
from hypothesis import given, strategies as st

from matcher.chem.cas import check_digit, is_valid_cas, normalise_cas

PUBLISHED = [
    ("water", "7732-18-5"),
    ("ethanol", "64-17-5"),
    ("benzene", "71-43-2"),
    ("limonene (racemic, dipentene)", "138-86-3"),
    ("linalool", "78-70-6"),
    ("α-pinene", "80-56-8"),
    ("formaldehyde", "50-00-0"),
    ("sodium chloride", "7647-14-5"),
]


@pytest.mark.parametrize("name,cas", PUBLISHED)
def test_published_numbers_pass(name, cas):
    assert is_valid_cas(cas), name
    assert normalise_cas(cas) == cas


def test_water_worked_example():
    # 8*1 + 1*2 + 2*3 + 3*4 + 7*5 + 7*6 = 105 -> 5 (CAS check-digit rule)
    assert check_digit("773218") == 5


@pytest.mark.parametrize("wrong", ["7732-18-4", "64-17-6", "71-43-3"])
def test_wrong_check_digit_refused(wrong):
    assert not is_valid_cas(wrong)
    with pytest.raises(ValueError, match="check digit"):
        normalise_cas(wrong)


@pytest.mark.parametrize("bad", ["", "abc", "7732-185", "1-23-4", "12345678-12-3", "7732_18_5"])
def test_malformed_refused(bad):
    assert not is_valid_cas(bad)


def test_forms_normalised():
    assert normalise_cas("007732-18-5") == "7732-18-5"
    assert normalise_cas("7732185") == "7732-18-5"
    assert normalise_cas("7732\u201318\u20135") == "7732-18-5"  # en dashes


def test_agrees_with_chemicals_package():
    # chemicals.identifiers.check_CAS (PyPI package `chemicals`) as the outside reference
    from chemicals.identifiers import check_CAS

    for _, cas in PUBLISHED:
        assert check_CAS(cas) is True
    assert check_CAS("7732-18-4") is False


@given(st.integers(min_value=10, max_value=9_999_999), st.integers(min_value=0, max_value=99))
def test_constructed_numbers_round_trip(first, middle):
    body = f"{first}{middle:02d}"
    cas = f"{first}-{middle:02d}-{check_digit(body)}"
    assert normalise_cas(cas) == cas
    wrong = f"{first}-{middle:02d}-{(check_digit(body) + 1) % 10}"
    assert not is_valid_cas(wrong)


@given(st.integers(min_value=10, max_value=9_999_999), st.integers(min_value=0, max_value=99))
def test_agrees_with_chemicals_on_random_numbers(first, middle):
    from chemicals.identifiers import check_CAS

    for r in range(10):
        cas = f"{first}-{middle:02d}-{r}"
        assert is_valid_cas(cas) == bool(check_CAS(cas))
