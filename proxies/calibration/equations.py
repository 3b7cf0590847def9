"""Published single-proxy calibration equations, each with its inverse.

Every equation is one pair of functions (proxy from climate, climate from proxy) named after
the paper, plus an entry in :data:`PUBLISHED_EQUATIONS` holding its coefficients with their
1-sigma uncertainties, the residual (calibration) error and the reference.

.. warning::
   The coefficients and uncertainties below were written **from memory** (see
   ../shared/DESIGN.md section 4). Verify them against the papers before relying on them; every
   value can be overridden in the run config (``[calibration.<column>]``).

Summary (T in degC, delta values in permil):

==================  ==========================================  =============================
name                formula                                     reference
==================  ==========================================  =============================
mgca_anand2003      Mg/Ca = 0.38 exp(0.090 T)                   Anand et al. 2003
mgca_elderfield2000 Mg/Ca = 0.52 exp(0.10 T)                    Elderfield & Ganssen 2000
uk37_mueller1998    UK'37 = 0.033 T + 0.044                     Mueller et al. 1998
uk37_prahl1988      UK'37 = 0.034 T + 0.039                     Prahl et al. 1988
tex86_kim2010       T = 68.4 log10(TEX86) + 38.6                Kim et al. 2010 (TEX86H)
tex86l_kim2010      T = 67.5 TEX86L + 46.9                      Kim et al. 2010 (TEX86L)
d18o_shackleton1974 T = 16.9 - 4.38 d + 0.10 d^2,               Shackleton 1974; Hut 1987
                    d = dc(VPDB) - (dw(VSMOW) - 0.27)
d18o_kim1997        1000 ln a = 18.03 (1e3 / T[K]) - 32.42      Kim & O'Neil 1997; Coplen 1983
==================  ==========================================  =============================
"""

from __future__ import annotations

from dataclasses import dataclass
from types import MappingProxyType
from typing import Callable, Mapping

import numpy as np

__all__ = [
    "Coefficient", "PublishedEquation", "PUBLISHED_EQUATIONS", "published_equation",
    "proxy_from_linear", "climate_from_linear", "proxy_from_exponential",
    "climate_from_exponential",
    "mgca_from_temperature_anand2003", "temperature_from_mgca_anand2003",
    "mgca_from_temperature_elderfield2000", "temperature_from_mgca_elderfield2000",
    "uk37_from_temperature_mueller1998", "temperature_from_uk37_mueller1998",
    "uk37_from_temperature_prahl1988", "temperature_from_uk37_prahl1988",
    "tex86_from_temperature_kim2010", "temperature_from_tex86_kim2010",
    "tex86l_from_temperature_kim2010", "temperature_from_tex86l_kim2010",
    "vpdb_from_vsmow_water_hut1987", "vsmow_from_vpdb_calcite_coplen1983",
    "temperature_from_d18o_shackleton1974", "d18o_from_temperature_shackleton1974",
    "temperature_from_d18o_kim1997", "d18o_from_temperature_kim1997",
]


# --------------------------------------------------------------------------- generic forms
def proxy_from_linear(climate, slope, intercept):
    """Linear calibration ``proxy = slope * climate + intercept``."""
    return slope * np.asarray(climate, dtype=float) + intercept


def climate_from_linear(proxy, slope, intercept):
    """Inverse of :func:`proxy_from_linear`: ``climate = (proxy - intercept) / slope``."""
    return (np.asarray(proxy, dtype=float) - intercept) / slope


def proxy_from_exponential(climate, prefactor, exponent):
    """Exponential calibration ``proxy = prefactor * exp(exponent * climate)``."""
    return prefactor * np.exp(exponent * np.asarray(climate, dtype=float))


def climate_from_exponential(proxy, prefactor, exponent):
    """Inverse of :func:`proxy_from_exponential`: ``climate = ln(proxy / prefactor) / exponent``.

    Non-positive proxy values give NaN.
    """
    proxy = np.asarray(proxy, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = proxy / prefactor
        return np.where(ratio > 0, np.log(np.where(ratio > 0, ratio, 1.0)) / exponent, np.nan)


# --------------------------------------------------------------------------- Mg/Ca
def mgca_from_temperature_anand2003(temperature, a=0.38, b=0.090):
    """Planktonic foraminiferal Mg/Ca [mmol/mol] from calcification temperature [degC].

    ``Mg/Ca = a exp(b T)``, multi-species sediment-trap calibration.

    References
    ----------
    Anand, P., Elderfield, H. & Conte, M. H. (2003). Calibration of Mg/Ca thermometry in
    planktonic foraminifera from a sediment trap time series. Paleoceanography 18(2), 1050.
    doi:10.1029/2002PA000846
    """
    return proxy_from_exponential(temperature, a, b)


def temperature_from_mgca_anand2003(mgca, a=0.38, b=0.090):
    """Temperature [degC] from Mg/Ca [mmol/mol]: ``T = ln(Mg/Ca / a) / b`` (Anand et al. 2003)."""
    return climate_from_exponential(mgca, a, b)


def mgca_from_temperature_elderfield2000(temperature, a=0.52, b=0.10):
    """Mg/Ca [mmol/mol] from temperature [degC]: ``Mg/Ca = a exp(b T)``.

    References
    ----------
    Elderfield, H. & Ganssen, G. (2000). Past temperature and d18O of surface ocean waters
    inferred from foraminiferal Mg/Ca ratios. Nature 405, 442-445. doi:10.1038/35013033
    """
    return proxy_from_exponential(temperature, a, b)


def temperature_from_mgca_elderfield2000(mgca, a=0.52, b=0.10):
    """Temperature [degC] from Mg/Ca [mmol/mol] (Elderfield & Ganssen 2000)."""
    return climate_from_exponential(mgca, a, b)


# --------------------------------------------------------------------------- alkenones
def uk37_from_temperature_mueller1998(temperature, slope=0.033, intercept=0.044):
    """UK'37 [unitless] from annual mean SST at 0 m [degC]: ``UK'37 = 0.033 T + 0.044``.

    References
    ----------
    Mueller, P. J., Kirst, G., Ruhland, G., von Storch, I. & Rosell-Mele, A. (1998).
    Calibration of the alkenone paleotemperature index UK'37 based on core-tops from the
    eastern South Atlantic and the global ocean (60N-60S). Geochim. Cosmochim. Acta 62(10),
    1757-1772. doi:10.1016/S0016-7037(98)00097-0
    """
    return proxy_from_linear(temperature, slope, intercept)


def temperature_from_uk37_mueller1998(uk37, slope=0.033, intercept=0.044):
    """SST [degC] from UK'37: ``T = (UK'37 - 0.044) / 0.033`` (Mueller et al. 1998)."""
    return climate_from_linear(uk37, slope, intercept)


def uk37_from_temperature_prahl1988(temperature, slope=0.034, intercept=0.039):
    """UK'37 from growth temperature [degC]: ``UK'37 = 0.034 T + 0.039`` (culture calibration).

    References
    ----------
    Prahl, F. G., Muehlhausen, L. A. & Zahnle, D. L. (1988). Further evaluation of long-chain
    alkenones as indicators of paleoceanographic conditions. Geochim. Cosmochim. Acta 52,
    2303-2310. doi:10.1016/0016-7037(88)90132-9
    """
    return proxy_from_linear(temperature, slope, intercept)


def temperature_from_uk37_prahl1988(uk37, slope=0.034, intercept=0.039):
    """Temperature [degC] from UK'37 (Prahl et al. 1988)."""
    return climate_from_linear(uk37, slope, intercept)


# --------------------------------------------------------------------------- TEX86
def temperature_from_tex86_kim2010(tex86, slope=68.4, intercept=38.6):
    """SST [degC] from TEX86 with the TEX86H calibration: ``T = 68.4 log10(TEX86) + 38.6``.

    Non-positive TEX86 values give NaN.

    References
    ----------
    Kim, J.-H. et al. (2010). New indices and calibrations derived from the distribution of
    crenarchaeal isoprenoid tetraether lipids: implications for past sea surface temperature
    reconstructions. Geochim. Cosmochim. Acta 74, 4639-4654. doi:10.1016/j.gca.2010.05.027
    """
    tex86 = np.asarray(tex86, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(tex86 > 0, slope * np.log10(np.where(tex86 > 0, tex86, 1.0)) + intercept,
                        np.nan)


def tex86_from_temperature_kim2010(temperature, slope=68.4, intercept=38.6):
    """TEX86 from SST [degC]: ``TEX86 = 10 ** ((T - 38.6) / 68.4)`` (Kim et al. 2010)."""
    return 10.0 ** ((np.asarray(temperature, dtype=float) - intercept) / slope)


def temperature_from_tex86l_kim2010(tex86l, slope=67.5, intercept=46.9):
    """SST [degC] from the low-temperature index: ``T = 67.5 TEX86L + 46.9``.

    ``TEX86L = log10(GDGT-2 / (GDGT-1 + GDGT-2 + GDGT-3))`` (a logarithm already, so it is
    negative); the companion of the TEX86H equation for waters below about 15 degC.

    References
    ----------
    Kim, J.-H. et al. (2010). Geochim. Cosmochim. Acta 74, 4639-4654, eq. for TEX86L.
    doi:10.1016/j.gca.2010.05.027
    """
    return climate_from_linear(tex86l, 1.0 / slope, -intercept / slope)


def tex86l_from_temperature_kim2010(temperature, slope=67.5, intercept=46.9):
    """TEX86L from SST [degC]: ``TEX86L = (T - 46.9) / 67.5`` (Kim et al. 2010)."""
    return (np.asarray(temperature, dtype=float) - intercept) / slope


# --------------------------------------------------------------------------- oxygen isotopes
def vpdb_from_vsmow_water_hut1987(d18o_water_vsmow, offset=-0.27):
    """Express a water d18O [permil VSMOW] on the VPDB scale: ``dw(VPDB) = dw(VSMOW) - 0.27``.

    References
    ----------
    Hut, G. (1987). Consultants' group meeting on stable isotope reference samples for
    geochemical and hydrological investigations. IAEA report, Vienna.
    """
    return np.asarray(d18o_water_vsmow, dtype=float) + offset


def vsmow_from_vpdb_calcite_coplen1983(d18o_calcite_vpdb):
    """Express a calcite d18O [permil VPDB] on the VSMOW scale: ``1.03091 d + 30.91``.

    References
    ----------
    Coplen, T. B., Kendall, C. & Hopple, J. (1983). Comparison of stable isotope reference
    samples. Nature 302, 236-238. doi:10.1038/302236a0
    """
    return 1.03091 * np.asarray(d18o_calcite_vpdb, dtype=float) + 30.91


def temperature_from_d18o_shackleton1974(d18o_calcite_vpdb, d18o_water_vsmow, a=16.9, b=-4.38,
                                         c=0.10, offset=-0.27):
    """Temperature [degC] from calcite and water d18O (palaeotemperature equation).

    ``T = a + b d + c d^2`` with ``d = dc(VPDB) - dw(VPDB)`` and
    ``dw(VPDB) = dw(VSMOW) + offset`` (Hut 1987).

    Parameters
    ----------
    d18o_calcite_vpdb : array_like
        Calcite (foraminifera) d18O [permil VPDB].
    d18o_water_vsmow : array_like
        Seawater d18O [permil VSMOW].

    References
    ----------
    Shackleton, N. J. (1974). Attainment of isotopic equilibrium between ocean water and the
    benthonic foraminifera genus Uvigerina: isotopic changes in the ocean during the last
    glacial. Colloques Internationaux du C.N.R.S. 219, 203-209.
    """
    d = np.asarray(d18o_calcite_vpdb, dtype=float) - vpdb_from_vsmow_water_hut1987(
        d18o_water_vsmow, offset)
    return a + b * d + c * d * d


def d18o_from_temperature_shackleton1974(temperature, d18o_water_vsmow, a=16.9, b=-4.38, c=0.10,
                                         offset=-0.27):
    """Calcite d18O [permil VPDB] from temperature [degC] and water d18O [permil VSMOW].

    Solves ``c d^2 + b d + (a - T) = 0`` for the root continuous with the linear equation
    (the one nearer zero; Shackleton 1974).
    """
    t = np.asarray(temperature, dtype=float)
    disc = b * b - 4.0 * c * (a - t)
    with np.errstate(invalid="ignore", divide="ignore"):
        # root of smaller magnitude in the cancellation-free form (a - T) / q
        q = -0.5 * (b + np.copysign(1.0, b) * np.sqrt(disc))
        d = (a - t) / q
    return d + vpdb_from_vsmow_water_hut1987(d18o_water_vsmow, offset)


def temperature_from_d18o_kim1997(d18o_calcite_vpdb, d18o_water_vsmow, a=18.03, b=-32.42):
    """Temperature [degC] from calcite and water d18O, inorganic calcite fractionation.

    ``1000 ln(alpha) = a (1e3 / T[K]) + b`` with
    ``alpha = (1000 + dc(VSMOW)) / (1000 + dw(VSMOW))`` and dc(VSMOW) from VPDB by Coplen et al.
    (1983).

    References
    ----------
    Kim, S.-T. & O'Neil, J. R. (1997). Equilibrium and nonequilibrium oxygen isotope effects
    in synthetic carbonates. Geochim. Cosmochim. Acta 61(16), 3461-3475.
    doi:10.1016/S0016-7037(97)00169-5
    """
    dc = vsmow_from_vpdb_calcite_coplen1983(d18o_calcite_vpdb)
    dw = np.asarray(d18o_water_vsmow, dtype=float)
    thousand_ln_alpha = 1000.0 * np.log((1000.0 + dc) / (1000.0 + dw))
    return a * 1e3 / (thousand_ln_alpha - b) - 273.15


def d18o_from_temperature_kim1997(temperature, d18o_water_vsmow, a=18.03, b=-32.42):
    """Calcite d18O [permil VPDB] from temperature [degC] and water d18O [permil VSMOW]."""
    t_kelvin = np.asarray(temperature, dtype=float) + 273.15
    alpha = np.exp((a * 1e3 / t_kelvin + b) / 1000.0)
    dc_vsmow = alpha * (1000.0 + np.asarray(d18o_water_vsmow, dtype=float)) - 1000.0
    return (dc_vsmow - 30.91) / 1.03091


# --------------------------------------------------------------------------- the registry
@dataclass(frozen=True)
class Coefficient:
    """A coefficient value with its 1-sigma uncertainty (0 when none is stated)."""

    value: float
    sigma: float = 0.0


@dataclass(frozen=True)
class PublishedEquation:
    """A published proxy-climate equation and what is known about its uncertainty.

    Attributes
    ----------
    name : str
        Key used in the run config (``equation = "<name>"``).
    proxy : str
        What the proxy is, with units.
    variable, units : str
        The climate variable it gives and its units.
    formula : str
        The equation as printed in the docs.
    coefficients : Mapping[str, Coefficient]
        Keyword arguments of ``climate_from_proxy`` with 1-sigma uncertainties.
    residual_sd : float
        Calibration (prediction) error [units, 1 sigma] stated with the equation.
    reference : str
        Short citation with DOI.
    uncertainty_note : str
        Where ``residual_sd`` and the coefficient sigmas come from.
    climate_from_proxy, proxy_from_climate : callable
        The inverse (used for reconstruction) and forward functions.
    needs_seawater : bool
        True for d18O equations, which take a seawater d18O [permil VSMOW] argument.
    climate_range : (float, float)
        Climate values of the paper's calibration data [units]; samples outside are flagged.
    companion : str
        Another equation of the field for the range beyond this one ('' when none), with why.

    Notes
    -----
    ``residual_sd`` is the paper's *total* calibration error; the coefficients are stored
    without their sigmas because the papers give no covariance for them, and drawing both
    would count the calibration error twice.
    """

    name: str
    proxy: str
    variable: str
    units: str
    formula: str
    coefficients: Mapping[str, Coefficient]
    residual_sd: float
    reference: str
    uncertainty_note: str
    climate_from_proxy: Callable
    proxy_from_climate: Callable
    needs_seawater: bool = False
    climate_range: tuple[float, float] = (-np.inf, np.inf)
    companion: str = ""

    @property
    def proxy_range(self) -> tuple[float, float] | None:
        """Proxy values that correspond to :attr:`climate_range` (``None`` for the d18O
        equations, whose proxy also depends on seawater d18O)."""
        if self.needs_seawater:
            return None
        ends = np.sort(np.asarray(self.proxy_from_climate(np.asarray(self.climate_range))))
        return float(ends[0]), float(ends[1])


def _frozen(mapping):
    return MappingProxyType(dict(mapping))


PUBLISHED_EQUATIONS: Mapping[str, PublishedEquation] = _frozen({
    e.name: e for e in [
        PublishedEquation(
            "mgca_anand2003", "Mg/Ca [mmol/mol]", "temperature", "degC",
            "Mg/Ca = 0.38 exp(0.090 T)",
            _frozen({"a": Coefficient(0.38), "b": Coefficient(0.090)}), 1.2,
            "Anand et al. (2003), Paleoceanography 18:1050, doi:10.1029/2002PA000846",
            "+-1.2 degC total as stated in the paper (from memory); the paper's a = 0.38 +- "
            "0.02 and b = 0.090 +- 0.003 are part of that total and are not drawn again; "
            "calibrated on about 8-30 degC (from memory)",
            temperature_from_mgca_anand2003, mgca_from_temperature_anand2003,
            climate_range=(8.0, 30.0)),
        PublishedEquation(
            "mgca_elderfield2000", "Mg/Ca [mmol/mol]", "temperature", "degC",
            "Mg/Ca = 0.52 exp(0.10 T)",
            _frozen({"a": Coefficient(0.52), "b": Coefficient(0.10)}), 1.2,
            "Elderfield & Ganssen (2000), Nature 405:442, doi:10.1038/35013033",
            "coefficient sigmas not recalled (0); residual 1.2 degC assumed like Anand et al. "
            "2003 (common practice) -- set residual_error to the paper's value; core tops of "
            "about 1-25 degC (from memory)",
            temperature_from_mgca_elderfield2000, mgca_from_temperature_elderfield2000,
            climate_range=(1.0, 25.0)),
        PublishedEquation(
            "uk37_mueller1998", "UK'37 [unitless]", "sst", "degC",
            "UK'37 = 0.033 T + 0.044",
            _frozen({"slope": Coefficient(0.033), "intercept": Coefficient(0.044)}),
            1.5,
            "Mueller et al. (1998), Geochim. Cosmochim. Acta 62:1757, "
            "doi:10.1016/S0016-7037(98)00097-0",
            "standard error of estimate about 1.5 degC (from memory); core tops of 0-29 degC "
            "(60N-60S), UK'37 saturates near 1 at the warm end (from memory)",
            temperature_from_uk37_mueller1998, uk37_from_temperature_mueller1998,
            climate_range=(0.0, 29.0)),
        PublishedEquation(
            "uk37_prahl1988", "UK'37 [unitless]", "temperature", "degC",
            "UK'37 = 0.034 T + 0.039",
            _frozen({"slope": Coefficient(0.034), "intercept": Coefficient(0.039)}), 1.5,
            "Prahl et al. (1988), Geochim. Cosmochim. Acta 52:2303, "
            "doi:10.1016/0016-7037(88)90132-9",
            "residual 1.5 degC assumed as for Mueller et al. 1998 (common practice); set "
            "residual_error to the paper's value; cultures at about 8-25 degC (from memory)",
            temperature_from_uk37_prahl1988, uk37_from_temperature_prahl1988,
            climate_range=(8.0, 25.0)),
        PublishedEquation(
            "tex86_kim2010", "TEX86 [unitless]", "sst", "degC",
            "T = 68.4 log10(TEX86) + 38.6",
            _frozen({"slope": Coefficient(68.4), "intercept": Coefficient(38.6)}), 2.5,
            "Kim et al. (2010), Geochim. Cosmochim. Acta 74:4639, doi:10.1016/j.gca.2010.05.027",
            "calibration error +-2.5 degC for TEX86H, recommended above 15 degC; core tops up "
            "to about 30 degC (from memory)",
            temperature_from_tex86_kim2010, tex86_from_temperature_kim2010,
            climate_range=(15.0, 30.0),
            companion="tex86l_kim2010 (TEX86L index) for waters below 15 degC"),
        PublishedEquation(
            "tex86l_kim2010", "TEX86L [unitless, log10]", "sst", "degC",
            "T = 67.5 TEX86L + 46.9",
            _frozen({"slope": Coefficient(67.5), "intercept": Coefficient(46.9)}), 4.0,
            "Kim et al. (2010), Geochim. Cosmochim. Acta 74:4639, doi:10.1016/j.gca.2010.05.027",
            "calibration error +-4.0 degC for TEX86L on core tops of about -3 to 30 degC "
            "(from memory)",
            temperature_from_tex86l_kim2010, tex86l_from_temperature_kim2010,
            climate_range=(-3.0, 30.0),
            companion="tex86_kim2010 (TEX86H) above 15 degC, with the smaller error"),
        PublishedEquation(
            "d18o_shackleton1974", "calcite d18O [permil VPDB]", "temperature", "degC",
            "T = 16.9 - 4.38 (dc - dw) + 0.10 (dc - dw)^2, dw(VPDB) = dw(VSMOW) - 0.27",
            _frozen({"a": Coefficient(16.9), "b": Coefficient(-4.38), "c": Coefficient(0.10)}),
            0.5,
            "Shackleton (1974), Colloq. Int. CNRS 219:203; VSMOW->VPDB: Hut (1987)",
            "no stated uncertainty recalled; 0.5 degC residual is an allowance (common "
            "practice); benthic foraminifera at about -2 to 22 degC (from memory)",
            temperature_from_d18o_shackleton1974, d18o_from_temperature_shackleton1974, True,
            climate_range=(-2.0, 22.0)),
        PublishedEquation(
            "d18o_kim1997", "calcite d18O [permil VPDB]", "temperature", "degC",
            "1000 ln(alpha) = 18.03 (1e3/T[K]) - 32.42",
            _frozen({"a": Coefficient(18.03), "b": Coefficient(-32.42)}), 0.5,
            "Kim & O'Neil (1997), Geochim. Cosmochim. Acta 61:3461, "
            "doi:10.1016/S0016-7037(97)00169-5; VPDB->VSMOW: Coplen et al. (1983)",
            "no stated uncertainty recalled; 0.5 degC residual is an allowance (common "
            "practice); synthetic calcite at 10-40 degC",
            temperature_from_d18o_kim1997, d18o_from_temperature_kim1997, True,
            climate_range=(10.0, 40.0)),
    ]
})


def published_equation(name: str) -> PublishedEquation:
    """Look up a published equation by its config name; KeyError lists the known names."""
    try:
        return PUBLISHED_EQUATIONS[name]
    except KeyError:
        raise KeyError(f"unknown equation '{name}'; known: {', '.join(PUBLISHED_EQUATIONS)}") \
            from None
