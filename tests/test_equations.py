"""Published proxy equations, their inverses and ensemble inversion with error propagation.

Coefficients are from memory (../shared/DESIGN.md section 4); the worked values below are
computed by hand from those printed equations and say so.
"""

from __future__ import annotations

import numpy as np
import pytest

from proxies.calibration.equations import (
    PUBLISHED_EQUATIONS, Coefficient, d18o_from_temperature_kim1997, published_equation,
    temperature_from_d18o_shackleton1974,
    temperature_from_mgca_anand2003, temperature_from_tex86_kim2010,
    temperature_from_uk37_mueller1998, vpdb_from_vsmow_water_hut1987)
from proxies.calibration.inversion import invert_ensemble


def test_published_coefficients_from_memory():
    """Coefficients as printed in the papers (from memory; DESIGN.md section 4)."""
    anand = PUBLISHED_EQUATIONS["mgca_anand2003"].coefficients
    assert (anand["a"].value, anand["b"].value) == (0.38, 0.090)
    # the papers' total errors only: coefficient sigmas are part of them, never drawn again
    assert all(c.sigma == 0 for eq in PUBLISHED_EQUATIONS.values()
               for c in eq.coefficients.values())
    m = PUBLISHED_EQUATIONS["uk37_mueller1998"].coefficients
    assert (m["slope"].value, m["intercept"].value) == (0.033, 0.044)  # Mueller et al. 1998
    k = PUBLISHED_EQUATIONS["tex86_kim2010"].coefficients
    assert (k["slope"].value, k["intercept"].value) == (68.4, 38.6)  # Kim et al. 2010
    s = PUBLISHED_EQUATIONS["d18o_shackleton1974"].coefficients
    assert (s["a"].value, s["b"].value, s["c"].value) == (16.9, -4.38, 0.10)  # Shackleton 1974
    for eq in PUBLISHED_EQUATIONS.values():
        assert eq.reference and eq.uncertainty_note and eq.residual_sd > 0


@pytest.mark.parametrize("function, value, expected", [
    # Mueller et al. 1998: T = (0.5 - 0.044) / 0.033 = 13.8182 degC (hand computation)
    (temperature_from_uk37_mueller1998, 0.5, 13.818181818),
    # Kim et al. 2010: T = 68.4 log10(0.6) + 38.6 = 68.4 * (-0.2218487) + 38.6 = 23.42555
    (temperature_from_tex86_kim2010, 0.6, 23.425545),
    # Anand et al. 2003: Mg/Ca = 0.38 exp(0.090 * 20) gives back T = 20 degC
    (temperature_from_mgca_anand2003, 0.38 * np.exp(1.8), 20.0),
])
def test_worked_values(function, value, expected):
    assert function(value) == pytest.approx(expected, abs=1e-5)


def test_shackleton_worked_values_and_vsmow_vpdb():
    """Shackleton (1974): T = 16.9 when calcite and water d18O are equal on the VPDB scale;
    water VSMOW -> VPDB is -0.27 permil (Hut 1987). dc = 1.0 VPDB, dw = 0 VSMOW:
    d = 1.27, T = 16.9 - 4.38*1.27 + 0.1*1.27^2 = 11.49869 degC (hand computation)."""
    assert vpdb_from_vsmow_water_hut1987(0.0) == pytest.approx(-0.27)
    assert temperature_from_d18o_shackleton1974(-0.27, 0.0) == pytest.approx(16.9)
    assert temperature_from_d18o_shackleton1974(1.0, 0.0) == pytest.approx(11.49869, abs=1e-5)
    # a water 1 permil heavier needs 1 permil heavier calcite for the same temperature
    assert temperature_from_d18o_shackleton1974(2.0, 1.0) == pytest.approx(11.49869, abs=1e-5)


def test_kim_oneil_fractionation_at_25c():
    """Kim & O'Neil (1997): 1000 ln(alpha) = 18.03e3/298.15 - 32.42 = 28.05 at 25 degC."""
    dc = d18o_from_temperature_kim1997(25.0, 0.0)
    dc_vsmow = 1.03091 * dc + 30.91  # Coplen et al. 1983
    assert 1000 * np.log((1000 + dc_vsmow) / 1000) == pytest.approx(28.0529, abs=1e-3)


def test_two_d18o_equations_roughly_agree():
    """Two independent palaeotemperature equations agree within 3 degC over 5-25 degC (they
    are known to differ by a degree or two; common practice)."""
    t = np.linspace(5, 25, 9)
    dc = d18o_from_temperature_kim1997(t, 0.0)
    assert np.max(np.abs(temperature_from_d18o_shackleton1974(dc, 0.0) - t)) < 3.0


@pytest.mark.parametrize("name", sorted(PUBLISHED_EQUATIONS))
def test_forward_inverse_round_trip(name):
    """proxy_from_climate and climate_from_proxy are inverses over 2-28 degC."""
    eq = published_equation(name)
    t = np.linspace(2.0, 28.0, 14)
    extra = (0.3,) if eq.needs_seawater else ()
    proxy = eq.proxy_from_climate(t, *extra)
    np.testing.assert_allclose(eq.climate_from_proxy(proxy, *extra), t, atol=1e-9)


def test_out_of_domain_gives_nan():
    assert np.isnan(temperature_from_mgca_anand2003(-1.0))
    assert np.isnan(temperature_from_tex86_kim2010(0.0))
    with pytest.raises(KeyError, match="known"):
        published_equation("no_such_equation")


def test_ensemble_spread_matches_delta_method():
    """With only analytical error, the ensemble SD equals sigma_p / |dP/dT| (delta method,
    Anand form dP/dT = b P) within Monte-Carlo error; coefficient error is shared by all
    samples (members correlated across samples)."""
    rng = np.random.default_rng(4)
    eq = published_equation("mgca_anand2003")
    mgca = np.array([2.0, 3.0, 4.0])
    no_coef = {k: Coefficient(c.value, 0.0) for k, c in eq.coefficients.items()}
    values = invert_ensemble(mgca, 0.05, eq.climate_from_proxy, no_coef, 0.0, 20000, rng)
    np.testing.assert_allclose(values.std(axis=1), 0.05 / (0.090 * mgca), rtol=0.03)
    fitted = {"a": Coefficient(0.38, 0.02), "b": Coefficient(0.090, 0.003)}  # Anand et al. 2003
    only_coef = invert_ensemble(mgca, 0.0, eq.climate_from_proxy, fitted, 0.0, 5000, rng)
    assert np.corrcoef(only_coef)[0, 2] > 0.9


def test_seawater_term_shifts_temperature():
    """A +1 permil seawater d18O warms the Shackleton estimate by about 4.4 degC near
    16.9 degC (the linear coefficient; hand computation)."""
    rng = np.random.default_rng(0)
    eq = published_equation("d18o_shackleton1974")
    base = invert_ensemble([-0.27], 0.0, eq.climate_from_proxy, eq.coefficients, 0.0, 10, rng,
                           {"d18o_water_vsmow": Coefficient(0.0)})
    heavy = invert_ensemble([-0.27], 0.0, eq.climate_from_proxy, eq.coefficients, 0.0, 10, rng,
                            {"d18o_water_vsmow": Coefficient(1.0)})
    assert heavy[0, 0] - base[0, 0] == pytest.approx(4.38 + 0.1, abs=1e-9)
