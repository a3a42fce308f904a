"""Uncertainty of zone totals: sources, zone-level Monte Carlo draws, intervals, contributions.

The model
---------
Per pixel i of a zone, the survey burn depth is ``d_i = true_i + b + e_i - dr * T``: ``b`` the
residual vertical bias left after co-registration (one value for the whole run), ``e_i`` a
spatially correlated random error (spherical variogram, sill sigma^2, range L), ``dr`` the error
of the subsidence rate removed over the survey interval T. The zone's carbon is
``C = sum d_i rho_i f_i A_i``. Because every error enters linearly (to first order), a zone is
reduced **once** to a few sums (the pipeline's zone sums, see :data:`SUM_KEYS`) and the draws are
made at zone level:

    V = volume + (b - dr T + E_z) * area + wt terms
    P = m_rho * (peat + (b - dr T + E_z) * rho_area + wt terms)
    C = m_rho * m_f * (carbon + (b - dr T + E_z) * rho_f_area + wt terms)
    G_g = m_g * EF_g / 1000 * P                  (gas g, smouldering; "Gas masses = peat mass x EF")
    D_fl = dm_fre * m_beta + dm_area * m_MB * m_Cf   (flaming dry matter), G_fl,g = m_fl,g EF_fl,g / 1000 * D_fl

``E_z`` is the mean of the correlated random error over the zone's surveyed area, drawn with the
standard deviation of :func:`correlated_sum_sd` (Rolstad et al. 2009), independently between
zones. ``b``, ``dr``, the water-table coefficients and every multiplicative factor ``m`` (mean 1)
are drawn once per draw and shared by all zones, so zone totals are correlated through them and
the run total keeps that correlation. Water-table terms: a depth model ``d = a + b_wt * wt``
(coefficients with covariance from the fit) adds ``da * wt_rho_f_area + db * wt_rho_f_area_wt``
to carbon, the sums taken over pixels where the model is not clipped (first order: clipped pixels
do not respond to small coefficient changes; the draws themselves are not clipped), and an optional
model residual adds a correlated zone-mean error like ``E_z`` over the water-table area.

The cost is O(draws x zones) arithmetic and never touches pixels; chunks of zones keep memory
below about 50 million floats (:data:`MAX_FLOATS`).

Pure functions: numbers and numpy arrays in, numpy arrays out; no files, no printing.

The package, one concept per module: :mod:`.sources` (the error sources, their defaults and
citations), :mod:`.averaging` (Rolstad area-averaging of a correlated error), :mod:`.zone_model`
(the zone sums and the linear zone-level model), :mod:`.monte_carlo` (draws and intervals) and
:mod:`.variance` (contributions of each source). The numerical machinery they use, random
streams, chunked drawing and the fast percentile selection, is not science and lives in
:mod:`peatburn.numerics`.

References
----------
Rolstad, C., Haug, T. & Denby, B. (2009). Spatially integrated geodetic glacier mass balance and its
uncertainty based on geostatistical analysis: application to the western Svartisen ice cap,
Norway. J. Glaciol. 55(192):666-680, doi:10.3189/002214309789470950.
Ballhorn, U., Siegert, F., Mason, M. & Limin, S. (2009). Derivation of burn scar depths and
estimation of carbon emissions with LIDAR in Indonesian peatlands. PNAS 106:21213-21218
(0.33 +/- 0.18 m mean burn depth; 49.15 +/- 26.81 Mt C). The +/- 0.18 m is, as recalled (the
abstract does not say), the spread of burn depth across the burned area, carried linearly to the
carbon: not the error of a total, and never used as one here (docs/method.md 3.1).
Wooster, M. J., Roberts, G., Perry, G. L. W. & Kaufman, Y. J. (2005). J. Geophys. Res. 110, D24311
(combustion coefficient 0.368 +/- 0.015 kg/MJ; recalled, unchecked).
Hu, Y., Fernandez-Anez, N., Smith, T. E. L. & Rein, G. (2018). Review of emissions from smouldering
peat fires and their contribution to regional haze episodes. Int. J. Wildland Fire 27:293-312
(mean fuel carbon 56.0 % for tropical peat: abstract checked; title and authors recalled, unchecked).
Hooijer, A. et al. (2012). Subsidence and carbon loss in drained tropical peatlands.
Biogeosciences 9:1053-1071 (title and pages recalled, unchecked; 3-5 cm/yr checked through a
secondary summary, see docs/sources.md).
IPCC (2006). 2006 IPCC Guidelines for National Greenhouse Gas Inventories, Vol. 4, Ch. 2,
Table 2.6 (combustion factors with standard deviations; recalled, unchecked).
JCGM 101:2008. Evaluation of measurement data - Supplement 1 to the "Guide to the expression of
uncertainty in measurement" - Propagation of distributions using a Monte Carlo method (the
2.5 and 97.5 percentiles of the draws as the 95 % coverage interval, §7.7; section recalled).
"""

from __future__ import annotations

from .averaging import MEDIAN_EFFICIENCY_FACTOR, correlated_sum_sd, residual_bias_sd
from .monte_carlo import MAX_FLOATS, draw_means, draw_zone_totals, intervals
from .sources import (
    DEFAULT_BIOMASS_CV,
    DEFAULT_BULK_DENSITY_CV,
    DEFAULT_CARBON_FRACTION,
    DEFAULT_CARBON_FRACTION_SD,
    DEFAULT_COMBUSTION_FACTOR,
    DEFAULT_COMBUSTION_FACTOR_SD,
    DEFAULT_EF_CV,
    DEFAULT_FRE_COEFFICIENT,
    DEFAULT_FRE_COEFFICIENT_SD,
    DEFAULT_SUBSIDENCE_RATE_SD,
    SOURCE_NAMES,
    Source,
    default_sources,
    ef_fallback_cv,
    sources_to_params,
)
from .variance import contributions, variance_components
from .zone_model import QUANTITY_COLUMNS, SUM_KEYS

__all__ = [
    "Source",
    "SOURCE_NAMES",
    "SUM_KEYS",
    "QUANTITY_COLUMNS",
    "MAX_FLOATS",
    "DEFAULT_SUBSIDENCE_RATE_SD",
    "DEFAULT_BULK_DENSITY_CV",
    "DEFAULT_CARBON_FRACTION",
    "DEFAULT_CARBON_FRACTION_SD",
    "DEFAULT_EF_CV",
    "DEFAULT_FRE_COEFFICIENT",
    "DEFAULT_FRE_COEFFICIENT_SD",
    "DEFAULT_BIOMASS_CV",
    "DEFAULT_COMBUSTION_FACTOR",
    "DEFAULT_COMBUSTION_FACTOR_SD",
    "MEDIAN_EFFICIENCY_FACTOR",
    "correlated_sum_sd",
    "residual_bias_sd",
    "ef_fallback_cv",
    "default_sources",
    "sources_to_params",
    "draw_zone_totals",
    "draw_means",
    "intervals",
    "variance_components",
    "contributions",
]
