"""Thermocouple tolerances: spot checks against the tolerance tables of IEC 60584-1 and
ASTM E230, values recalled (from memory)."""

import math

import pytest

from heatsight.data_io import thermocouples as tc


@pytest.mark.parametrize("tc_type, tc_class, t_c, tol", [
    ("K", "2", 100.0, 2.5),       # IEC 60584-1 class 2: +-2.5 degC or 0.0075|t| (from memory)
    ("K", "2", 1000.0, 7.5),      # IEC 60584-1 class 2: 0.0075 * 1000 (from memory)
    ("K", "1", 500.0, 2.0),       # IEC 60584-1 class 1: +-1.5 degC or 0.004|t| (from memory)
    ("K", "1", 200.0, 1.5),       # IEC 60584-1 class 1 (from memory)
    ("T", "1", 100.0, 0.5),       # IEC 60584-1 class 1 type T: +-0.5 degC or 0.004|t| (from memory)
    ("T", "3", -100.0, 1.5),      # IEC 60584-1 class 3 type T: 0.015|t| (from memory)
    ("J", "2", 300.0, 2.5),       # IEC 60584-1 class 2 type J (from memory)
    ("R", "1", 1200.0, 1.3),      # IEC 60584-1 class 1 type R: 1 + 0.003(t - 1100) (from memory)
    ("S", "1", 800.0, 1.0),       # IEC 60584-1 class 1 type S (from memory)
    ("K", "standard", 500.0, 3.75),   # ASTM E230 standard limits: 2.2 degC or 0.75 % (from memory)
    ("K", "standard", 100.0, 2.2),    # ASTM E230 standard limits (from memory)
    ("K", "special", 500.0, 2.0),     # ASTM E230 special limits: 1.1 degC or 0.4 % (from memory)
    ("T", "special", 100.0, 0.5),     # ASTM E230 special limits type T: 0.5 degC or 0.4 % (from memory)
    ("E", "standard", 400.0, 2.0),    # ASTM E230 standard limits type E: 1.7 degC or 0.5 % (from memory)
    ("B", "standard", 1000.0, 5.0),   # ASTM E230 standard limits type B: 0.5 % (from memory)
])
def test_tolerance_spot_checks(tc_type, tc_class, t_c, tol):
    got, note = tc.tolerance_c(tc_type, tc_class, t_c)
    assert got == pytest.approx(tol, rel=1e-12)
    assert note is None


def test_standard_uncertainty_is_rectangular():
    # GUM, JCGM 100:2008 §4.3.7: a +-a interval read as rectangular has u = a / sqrt(3)
    u, note = tc.standard_uncertainty("K", "2", 373.15)
    assert u == pytest.approx(2.5 / math.sqrt(3.0), rel=1e-12)
    assert note is None


def test_outside_class_range_is_noted():
    tol, note = tc.tolerance_c("K", "1", 1100.0)    # class 1 stops at 1000 degC (from memory)
    assert tol == pytest.approx(0.004 * 1100.0)
    assert "outside the range" in note


@pytest.mark.parametrize("tc_type, lo, hi", [
    ("K", -270.0, 1372.0),    # IEC 60584-1 reference function range type K (from memory)
    ("T", -270.0, 400.0),     # IEC 60584-1 reference function range type T (from memory)
    ("J", -210.0, 1200.0),    # IEC 60584-1 reference function range type J (from memory)
    ("B", 0.0, 1820.0),       # IEC 60584-1 reference function range type B (from memory)
])
def test_usable_range(tc_type, lo, hi):
    k_lo, k_hi = tc.usable_range_k(tc_type)
    assert (k_lo - 273.15, k_hi - 273.15) == pytest.approx((lo, hi))


@pytest.mark.parametrize("text, expected", [("k", "K"), ("type K", "K"), (" n ", "N")])
def test_normalize_type(text, expected):
    assert tc.normalize_type(text) == expected


@pytest.mark.parametrize("text, expected", [("1", "1"), ("class 2", "2"), ("Standard", "standard"),
                                            ("SPECIAL", "special"), ("3.0", "3")])
def test_normalize_class(text, expected):
    assert tc.normalize_class(text) == expected


def test_unknown_type_and_class():
    with pytest.raises(ValueError, match="expected one of B, E, J, K, N, R, S, T"):
        tc.normalize_type("X")
    with pytest.raises(ValueError, match="IEC 60584-1"):
        tc.normalize_class("4")


def test_undefined_combination():
    with pytest.raises(ValueError, match="no tolerance is defined for type J"):
        tc.check_defined("J", "3")


def test_default_sigma_is_documented():
    assert tc.DEFAULT_SIGMA_K == 0.5     # common practice, no source
