"""Radiocarbon reporting conversions (proxies.chronology.radiocarbon).

Sources: Stuiver & Polach (1977), Radiocarbon 19:355, doi:10.1017/S0033822200003672 (age
t = -8033 ln F, Libby half-life 5568 yr; Delta14C = 1000 (F exp(cal BP / 8267) - 1));
Reimer, Brown & Reimer (2004), Radiocarbon 46:1299 (F14C); pMC = 100 F14C (common practice);
the IntCal20 curve file (Reimer et al. 2020, doi:10.1017/RDC.2020.41) and its README in
../shared/reference.
"""

from __future__ import annotations

import numpy as np
import pytest

from proxies.chronology import radiocarbon as rc
from proxies.chronology.curves import parse_curve_text


def test_half_of_modern_is_one_libby_half_life():
    """F14C 0.5 <-> 5568 14C yr (Stuiver & Polach 1977: Libby half-life 5568 yr); tol 0.5 yr.

    8033 ln 2 = 5568.1, the 8033-yr mean life being itself rounded.
    """
    assert rc.age_from_f14c(0.5) == pytest.approx(5568.0, abs=0.5)
    assert rc.f14c_from_age(5568.0) == pytest.approx(0.5, abs=5e-5)


def test_modern_and_two_half_lives():
    """F = 1 is age 0 and pMC 100; F = 0.25 is two half-lives, 11136 14C yr (same source)."""
    assert rc.age_from_f14c(1.0) == 0.0
    assert rc.pmc_from_f14c(1.0) == 100.0
    assert rc.f14c_from_pmc(25.0) == 0.25
    assert rc.age_from_f14c(0.25) == pytest.approx(2 * 5568.0, abs=1.0)


def test_round_trips():
    f = np.array([0.01, 0.3, 0.77, 1.0, 1.2])
    np.testing.assert_allclose(rc.f14c_from_age(rc.age_from_f14c(f)), f, rtol=1e-12)
    cal = np.array([0.0, 1000.0, 12000.0, 40000.0])
    d = rc.delta14c_from_f14c(f[:4], cal)
    np.testing.assert_allclose(rc.f14c_from_delta14c(d, cal), f[:4], rtol=1e-12)
    np.testing.assert_allclose(rc.age_from_delta14c(rc.delta14c_from_age([500.0, 9000.0], [520.0, 10100.0]),
                                                   [520.0, 10100.0]), [500.0, 9000.0], atol=1e-8)


def test_delta14c_worked_values():
    """Delta14C = 1000 (F exp(cal/8267) - 1) (Stuiver & Polach 1977), hand-computed values:
    F = 1 at 0 cal BP -> 0 permil; F = exp(-1) at 8267 cal BP -> 0 permil; F = 1 at 8267 cal BP
    -> 1000 (e - 1) = 1718.28 permil."""
    assert rc.delta14c_from_f14c(1.0, 0.0) == pytest.approx(0.0, abs=1e-12)
    assert rc.delta14c_from_f14c(np.exp(-1.0), 8267.0) == pytest.approx(0.0, abs=1e-9)
    assert rc.delta14c_from_f14c(1.0, 8267.0) == pytest.approx(1000 * (np.e - 1), rel=1e-12)


def test_error_propagation_matches_finite_differences():
    f, sf = 0.6, 0.003
    age, s_age = rc.age_from_f14c(f, sf)
    numeric = (rc.age_from_f14c(f - 1e-6) - rc.age_from_f14c(f + 1e-6)) / 2e-6 * sf
    assert s_age == pytest.approx(numeric, rel=1e-6)
    back, s_back = rc.f14c_from_age(age, s_age)
    assert back == pytest.approx(f) and s_back == pytest.approx(sf, rel=1e-9)


def test_rejects_non_positive_f14c():
    with pytest.raises(ValueError, match="F14C"):
        rc.age_from_f14c([0.5, 0.0])


def _intcal(path):
    return parse_curve_text(path.read_text(encoding="utf-8"), "intcal20", str(path))


def test_intcal20_delta14c_column_agrees_0_to_12_kyr(intcal20_path):
    """The curve's Delta14C column vs our conversion of its 14C-age column: within 0.12 permil
    (rounding) for 0-12 cal kBP, as its README (../shared/reference/README.md) states."""
    curve = _intcal(intcal20_path)
    young = curve.cal_bp <= 12000
    ours = rc.delta14c_from_age(curve.c14_age[young], curve.cal_bp[young])
    assert np.max(np.abs(ours - curve.delta14c[young])) <= 0.13


def test_intcal20_delta14c_column_agrees_whole_curve_with_mean_f14c(intcal20_path):
    """With the mean-F14C term sigma^2 / (2 8033^2), the gap is at most 0.2 permil over the
    whole curve (README of ../shared/reference); without it, up to ~12 permil at 55 kBP."""
    curve = _intcal(intcal20_path)
    ours = rc.delta14c_from_age(curve.c14_age, curve.cal_bp, curve.c14_sigma)
    assert np.max(np.abs(ours - curve.delta14c)) <= 0.21
    plain = rc.delta14c_from_age(curve.c14_age, curve.cal_bp)
    assert np.max(np.abs(plain - curve.delta14c)) > 5.0
