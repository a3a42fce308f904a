"""Burn depth where no survey exists: a linear water-table model capped by the peat thickness.

The model
---------
Peat below the water table is saturated and does not smoulder; the layer above it dries out and
can burn, and that combustible layer deepens as the water table falls (Usup et al. 2004;
Wösten et al. 2008; Hayasaka et al. 2016, whose chapter abstract states that "the depth of
combustible peat layer increased linearly with lowering of groundwater level"). peatburn
writes that relation as

    d = clip(a + b * w, 0, T)

with ``w`` the depth of the water table below the surface at fire time [m, positive down],
``a`` the intercept [m], ``b`` the slope [m of burn per m of water-table depth], ``T`` the peat
thickness [m] (fire cannot remove more peat than is there) and ``d`` the burn depth [m]. The
lower clip at 0 says a water table at or above the point where the line crosses zero burns no peat.

Sign convention: ``w`` is **positive downwards** (0.6 means 60 cm below the surface). Dipwell
records and many papers write the groundwater level the other way round (negative below the
surface, e.g. "GWL -30 cm"); :func:`check_water_table` refuses data that look like that.

Fitting
-------
Where both a survey burn depth and a water table exist (the surveyed scars), ``a`` and ``b`` are
fitted robustly, because survey differences contain artefacts such as canal edges, spoil banks
and unmasked water, that ordinary least squares would follow:

* ``"theil-sen"`` (default): the slope is the median of the slopes between all pairs of points
  (Theil 1950; Sen 1968), the intercept the median of ``d - b w``. Breakdown point about 29 %
  (recalled, unchecked). Above 2000 points the median is taken over 2,000,000 randomly drawn pairs
  (a randomized Theil-Sen estimator); its Monte Carlo error is far below the standard error.
* ``"huber"``: Huber's M-estimator (Huber 1964) by iteratively reweighted least squares, tuning
  constant 1.345 times a robust scale (the normalized median absolute deviation of the
  residuals, re-estimated each iteration); 1.345 gives about 95 % efficiency for normal errors
  (Holland & Welsch 1977; recalled, unchecked).

**The mean, not the median.** Totals add burn depths, so the model must predict the conditional
*mean* depth. Theil-Sen and Huber estimate the conditional *median*; burn depth given the water
table is skewed (shallow burn at scar edges, deep pockets), so a median line is biased for totals.
With ``target="mean"`` (the default) the robust fit only *screens* artefacts: pairs whose residual
from the robust line lies more than :data:`SCREEN_K` robust scales (NMAD) from the median residual
are dropped (each side of the median with its own scale, so the long tail of a skewed scatter is
kept), and ordinary least squares on the remaining pairs gives the line. This is the
reweighted least squares with hard rejection of Rousseeuw & Leroy (1987, ch. 1 and 5; there with a
cutoff of 2.5 scales); peatburn uses a wider cutoff (8) so that the real tail of a skewed depth
distribution is kept and only gross artefacts go (a choice of this project). Least squares on the
kept pairs is unbiased for the conditional mean when the mean is linear in ``w``, whatever the
shape of the scatter. (For a linear model on the original scale this is also what Duan's (1983)
smearing correction of a robust line amounts to for the intercept; least squares also corrects the
slope.) ``target="median"`` keeps the plain robust line.

**Censoring.** Pixels whose observed depth was capped at the peat thickness carry a depth that is
a lower bound, not a value; with ``thickness_m`` given they are left out of the fit (their count is
in the notes; a selection that slightly favours shallow pixels on thin peat, far smaller than the
bias of fitting capped values as if uncapped). Survey depths are not floored at zero
(:mod:`peatburn.science.survey`), so no pixel is censored at zero.

**Errors in the water table (regression dilution).** When the water table at the fitted pixels
carries a random error of standard deviation ``sigma_u`` (interpolated between stations, or
modelled), least squares flattens the slope by the reliability ratio
``lambda = (S_ww - n sigma_u^2) / S_ww``. With ``water_table_error_m`` given, the fit divides it out
(the method-of-moments errors-in-variables estimator, Fuller 1987, section 1.1; the limit of
Deming regression when the error variance of ``w`` is known; recalled, unchecked):
``b = S_wd / (S_ww - n sigma_u^2)``, ``a = mean(d) - b mean(w)``. Use it only when the water table
where the model is *applied* is better known than where it was *fitted*: when both carry the same
error, the attenuated slope is the right predictor of the mean depth given the water table one
actually has (Carroll et al. 2006, ch. 2; recalled, unchecked).

**Leave-scar-out cross-validation.** :func:`scar_cross_validation` refits the model with whole
scars left out (groups of scars per fold; never single pixels, whose neighbours would leak the
answer: Roberts et al. 2017) and compares each held-out scar's predicted and observed sum of depth
(times a weight, e.g. density x carbon fraction x area, so carbon). Its bias and RMSE are the
honest prediction error of a scar the survey missed.

Standard errors and the intercept-slope covariance come from a case-resampling bootstrap
(Efron & Tibshirani 1993): resampling pixels (which assumes independent pixels and is therefore
overconfident for spatially autocorrelated scars), or, when scar labels are given, resampling
whole scars (a cluster bootstrap; Field & Welsh 2007), which is the honest choice. Bootstrap
replicates use at most ``boot_size`` points; with pixel resampling the standard error of ``m``
points is scaled to ``n`` by ``sqrt(m / n)`` (the m-out-of-n bootstrap, Bickel, Götze & van Zwet
1997, valid for root-n estimators such as these).

Defaults
--------
:data:`DEFAULT_MODEL` (``a = -0.40 m``, ``b = 1.0``) is a construction of this project from two
published statements, not a published fit; its confidence is ``"default (low confidence)"``.
See its docstring.

Interpolating stations
----------------------
:func:`idw` interpolates water-table readings at stations onto pixels by inverse distance
weighting (Shepard 1968). It has no error model, draws "bull's-eyes" around stations, and cannot
extrapolate beyond the range of the readings (see its docstring); :func:`idw_cross_validation`
gives its leave-one-out error, the only honest measure of how far to trust it.

All functions are pure: arrays and numbers in, arrays and numbers out; no files, no printing.

References
----------
Usup, A., Hashimoto, Y., Takahashi, H. & Hayasaka, H. (2004). Combustion and thermal
characteristics of peat fire in tropical peatland in Central Kalimantan, Indonesia. Tropics
14(1) (title, authors and issue checked against the first page; pages and findings on the water
table recalled, unchecked).
Wösten, J. H. M., Clymans, E., Page, S. E., Rieley, J. O. & Limin, S. H. (2008). Peat-water
interrelationships in a tropical peatland ecosystem in Southeast Asia. Catena 73:212-224
(journal, volume and pages recalled, unchecked; the same authors' 2008 International Peat Congress
paper of the same title was checked: keep the water table between 40 cm below and 100 cm above
the peat surface to prevent subsidence and fire).
Hayasaka, H., Takahashi, H., Limin, S. H., Yulianti, N. & Usup, A. (2016). Peat fire occurrence.
In Osaki, M. & Tsuji, N. (eds), Tropical Peatland Ecosystems, Springer, Ch. 25 (editors and
publisher recalled, unchecked; chapter authors and abstract checked).
Theil, H. (1950). A rank-invariant method of linear and polynomial regression analysis.
Proc. K. Ned. Akad. Wet. 53. Sen, P. K. (1968). Estimates of the regression coefficient based on
Kendall's tau. J. Am. Stat. Assoc. 63:1379-1389.
Huber, P. J. (1964). Robust estimation of a location parameter. Ann. Math. Stat. 35:73-101.
Holland, P. W. & Welsch, R. E. (1977). Robust regression using iteratively reweighted
least-squares. Commun. Stat. Theory Methods 6:813-827.
Efron, B. & Tibshirani, R. J. (1993). An Introduction to the Bootstrap. Chapman & Hall.
Field, C. A. & Welsh, A. H. (2007). Bootstrapping clustered data. J. R. Stat. Soc. B 69:369-390.
Bickel, P. J., Götze, F. & van Zwet, W. R. (1997). Resampling fewer than n observations.
Stat. Sin. 7:1-31.
Shepard, D. (1968). A two-dimensional interpolation function for irregularly-spaced data.
Proc. 23rd ACM National Conference, 517-524.
Rousseeuw, P. J. & Leroy, A. M. (1987). Robust Regression and Outlier Detection. Wiley.
Duan, N. (1983). Smearing estimate: a nonparametric retransformation method. J. Am. Stat. Assoc.
78:605-610.
Fuller, W. A. (1987). Measurement Error Models. Wiley.
Carroll, R. J., Ruppert, D., Stefanski, L. A. & Crainiceanu, C. M. (2006). Measurement Error in
Nonlinear Models, 2nd ed. Chapman & Hall/CRC.
Roberts, D. R. et al. (2017). Cross-validation strategies for data with temporal, spatial,
hierarchical, or phylogenetic structure. Ecography 40:913-929.
(Bibliographic details of the statistics references are recalled, unchecked.)
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import asdict, dataclass, field, replace

import numpy as np
from scipy.spatial import cKDTree

from ..errors import GridError, PhysicalRangeError
from .survey import NMAD_CONSTANT

__all__ = [
    "DepthModel",
    "DEFAULT_MODEL",
    "METHODS",
    "predict_depth",
    "predict_depth_grouped",
    "fit_depth_model",
    "fit_depth_models_by_group",
    "scar_cross_validation",
    "with_cross_validation",
    "select_edge_taper",
    "select_covariates",
    "edge_taper",
    "thickness_taper",
    "covariate_factor",
    "covariate_labels",
    "extrapolated_share",
    "user_model",
    "check_water_table",
    "idw",
    "idw_cross_validation",
    "readings_near_date",
    "nearest_dated",
    "validate_against_plots",
]

#: Robust fitting methods of :func:`fit_depth_model`.
METHODS = ("theil-sen", "huber")

#: Huber tuning constant in units of the residual scale: about 95 % efficiency under normal errors
#: (Holland & Welsch 1977; recalled, unchecked).
HUBER_C = 1.345

#: |water-table depth| above this [m] is refused as a unit error (cm or mm read as m) or an
#: undeclared nodata value. Tropical peat water tables lie within about 1 m above and a few m
#: below the surface (Wösten et al. 2008 report flooding above 100 cm and dry-season levels below
#: the 40 cm threshold); 10 m is far outside that: common practice.
MAX_ABS_WATER_TABLE_M = 10.0
#: Deeper than this [m] below the surface draws a warning (common practice).
DEEP_WATER_TABLE_WARN_M = 3.0
#: More than this share of negative values (water above the surface) is refused as a sign error.
NEGATIVE_SHARE_ERROR = 0.5
#: More than this share of negative values draws a warning.
NEGATIVE_SHARE_WARN = 0.05

#: What the fit predicts: the conditional mean (for totals) or the conditional median.
TARGETS = ("mean", "median")
#: Screening cutoff of ``target="mean"``: pairs whose residual from the robust line lies more than
#: this many robust scales (per side) from the median residual are treated as artefacts.
#: Rousseeuw & Leroy (1987) reject at 2.5 scales for normal errors; burn depths are skewed and
#: multiplicative (edge taper x deep pockets), where 5 scales still cut about 4 % of the total of a
#: synthetic edge-tapered scene (tests/science/test_water_table_mean.py) and 8 cut under 1 %, while
#: canal-edge artefacts of 2-4 m stay far beyond 8 scales of a 0.05-0.15 m scatter. Project choice.
SCREEN_K = 8.0
#: Reliability ratio below which the errors-in-variables correction is refused (the water-table
#: error would be more than half of its spread: the corrected slope is unstable). Project choice.
MIN_RELIABILITY = 0.5
#: Fewest scars a group (first / repeat fire) needs for a model of its own. A bootstrap over fewer
#: clusters underestimates the slope error badly (Cameron, Gelbach & Miller 2008, Rev. Econ. Stat.
#: 90:414-427, on few-cluster inference; recalled, unchecked); 10 is a project choice.
MIN_SCARS_PER_GROUP = 10
#: Folds of :func:`scar_cross_validation` at most (leave-one-scar-out below that many scars);
#: 10-fold is common practice (Hastie, Tibshirani & Friedman 2009, section 7.10; recalled, unchecked).
CV_FOLDS = 10

#: Fewest valid pairs :func:`fit_depth_model` accepts.
MIN_FIT_SAMPLES = 5
#: Fewer pairs than this, or fewer scars than :data:`MIN_CLUSTERS`, add a caution to the notes.
FEW_SAMPLES = 30
MIN_CLUSTERS = 5
#: A water-table range narrower than this [m] leaves the slope poorly constrained.
NARROW_RANGE_M = 0.2

_EXACT_PAIRS_MAX = 2_000_000
_SAMPLED_PAIRS = 2_000_000
#: Random pairs of a Theil-Sen line inside a cluster-bootstrap replicate (a replicate keeps at least
#: one pixel per scar, so tens of thousands of points at national scale; the replicate's spread, not
#: its own Monte Carlo error of about 1/sqrt(200 000), is what the bootstrap measures).
_BOOT_SAMPLED_PAIRS = 200_000
_DEFAULT_BOOT_SIZE = {"theil-sen": 600, "huber": 5000}


# ----------------------------------------------------------------------------- the model

_FLOAT_FIELDS = ("intercept", "slope", "intercept_se", "slope_se", "covariance", "r2", "rmse", "residual_nmad",
                 "water_table_error_m", "cv_bias", "cv_rmse", "edge_taper_m", "thickness_taper_m")


@dataclass(frozen=True)
class DepthModel:
    """Coefficients of ``d = clip(a + b w, 0, T)`` with their uncertainty and provenance.

    Attributes
    ----------
    intercept : float
        ``a`` [m].
    slope : float
        ``b`` [m burn depth per m water-table depth].
    intercept_se, slope_se : float
        Standard errors of ``a`` [m] and ``b`` [m/m]; NaN when unknown.
    covariance : float
        Covariance of ``a`` and ``b`` [m]; with the SEs it gives the 2 x 2 covariance matrix of
        :meth:`covariance_matrix` for Monte Carlo draws.
    n : int
        Pairs the fit used (0 for user and default coefficients).
    r2 : float
        Coefficient of determination of the (unclipped) line on the fitted pairs,
        ``1 - SS_res / SS_tot``; NaN when not fitted. A robust line is not the least-squares
        line, so with outliers its R² is lower than the least-squares R² would be.
    rmse : float
        Root mean square residual of the line on the fitted pairs [m]; outliers inflate it,
        see ``residual_nmad``.
    method : str
        ``"theil-sen"``, ``"huber"``, ``"user"``, ``"default"`` or ``"pooled"`` (a group that
        fell back on the pooled fit).
    confidence : str
        ``"fitted"``, ``"user"`` or ``"default (low confidence)"``.
    se_method : str
        How the standard errors were obtained.
    water_table_range : tuple of float
        (min, max) water-table depth of the fitted pairs [m]; predictions outside it extrapolate.
    n_clusters : int
        Scars in the fit (0 when no labels were given).
    residual_nmad : float
        Normalized median absolute deviation of the residuals [m] (robust spread).
    notes : tuple of str
        Cautions found while fitting (few samples, narrow range, negative slope...).
    basis : str
        Where the coefficients come from (citation for defaults).
    target : str
        ``"mean"`` or ``"median"`` for fitted models (what the line predicts); ``""`` otherwise.
    estimator : str
        The fit in words (screened least squares, errors-in-variables, plain robust line).
    n_screened : int
        Pairs dropped as artefacts by the screen of ``target="mean"``.
    n_censored : int
        Pairs left out because their depth was capped at the peat thickness.
    water_table_error_m : float
        Water-table error [m] the errors-in-variables fit corrected for; NaN when none.
    cv_n_scars : int
        Scars in the leave-scar-out cross-validation (0 when not run).
    cv_bias, cv_rmse : float
        Leave-scar-out error of a scar's carbon (or depth sum), relative to the observed total:
        ``sum(P - O) / sum(O)`` and ``sqrt(mean((P_s - O_s)^2)) / mean(O_s)`` [-]; NaN when not run.
    cv_method : str
        How the cross-validation was done.
    edge_taper_m : float
        E-folding distance [m] of the edge taper ``1 - exp(-e / L)`` that multiplies the depth
        (:func:`edge_taper`); 0 for none.
    thickness_taper_m : float
        Scale [m] of the thin-peat factor ``1 - exp(-T / L_T)`` that multiplies the depth
        (:func:`thickness_taper`); 0 for none.
    cv_scores : dict
        Leave-scar-out score (root mean square of the per-scar relative errors of carbon) of every
        covariate set tried by :func:`select_covariates`, by label ("none", "edge 20 m",
        "thickness 0.5 m", ...); empty when no selection was run.
    """

    intercept: float
    slope: float
    intercept_se: float
    slope_se: float
    covariance: float
    n: int
    r2: float
    rmse: float
    method: str
    confidence: str
    se_method: str = ""
    water_table_range: tuple[float, float] = (math.nan, math.nan)
    n_clusters: int = 0
    residual_nmad: float = math.nan
    notes: tuple[str, ...] = field(default_factory=tuple)
    basis: str = ""
    target: str = ""
    estimator: str = ""
    n_screened: int = 0
    n_censored: int = 0
    water_table_error_m: float = math.nan
    cv_n_scars: int = 0
    cv_bias: float = math.nan
    cv_rmse: float = math.nan
    cv_method: str = ""
    edge_taper_m: float = 0.0
    thickness_taper_m: float = 0.0
    cv_scores: dict = field(default_factory=dict)

    def __post_init__(self):
        # Accept what a JSON round trip gives back (None for NaN, lists for tuples), so
        # ``DepthModel(**json.load(...))`` rebuilds the model that :meth:`to_dict` wrote.
        for name in _FLOAT_FIELDS:
            value = getattr(self, name)
            object.__setattr__(self, name, math.nan if value is None else float(value))
        rng = self.water_table_range
        if rng is None:
            rng = (math.nan, math.nan)
        object.__setattr__(self, "water_table_range",
                           tuple(math.nan if v is None else float(v) for v in rng))
        object.__setattr__(self, "notes", tuple(self.notes or ()))
        object.__setattr__(self, "cv_scores", {str(k): math.nan if v is None else float(v)
                                               for k, v in dict(self.cv_scores or {}).items()})
        object.__setattr__(self, "n", int(self.n or 0))
        for name in ("n_clusters", "n_screened", "n_censored", "cv_n_scars"):
            object.__setattr__(self, name, int(getattr(self, name) or 0))

    @classmethod
    def from_dict(cls, data: Mapping) -> "DepthModel":
        """Rebuild a model from :meth:`to_dict` output (unknown keys ignored, missing optional
        fields take their defaults)."""
        names = cls.__dataclass_fields__
        return cls(**{k: v for k, v in data.items() if k in names})

    def to_dict(self) -> dict:
        """Plain dict (floats, ints, strings, lists) for JSON and provenance; NaN stays NaN."""
        out = asdict(self)
        out["water_table_range"] = [float(v) for v in self.water_table_range]
        out["notes"] = list(self.notes)
        return out

    def covariance_matrix(self) -> np.ndarray:
        """2 x 2 covariance of (a, b) [m², m, m, (m/m)²]; zeros where the SEs are NaN."""
        sa = 0.0 if math.isnan(self.intercept_se) else self.intercept_se
        sb = 0.0 if math.isnan(self.slope_se) else self.slope_se
        c = 0.0 if math.isnan(self.covariance) else self.covariance
        return np.array([[sa * sa, c], [c, sb * sb]])

    def predict(self, water_table_m, thickness_m=None, edge_distance_m=None) -> np.ndarray:
        """Burn depth [m]; see :func:`predict_depth`."""
        return predict_depth(self, water_table_m, thickness_m, edge_distance_m)

    @property
    def covariates(self) -> tuple[str, ...]:
        """The covariates beside the water table, in words (empty: the water table alone)."""
        return covariate_labels(self.edge_taper_m, self.thickness_taper_m)


#: Default coefficients, used only when neither surveyed scars nor field plots allow a fit and
#: the user gives none: ``d = clip(w - 0.40, 0, T)``. **Low confidence.**
#:
#: Basis (a construction of this project, not a published fit):
#:
#: * slope 1.0: the combustible layer is the peat above the water table and deepens linearly as
#:   the water table falls (Hayasaka et al. 2016, chapter abstract, checked; Usup et al. 2004
#:   describe fire fronts and fuel losses in the peat above the water table: recalled, unchecked).
#:   A slope of 1 is the largest the physics allows (no peat burns below the water table), so it
#:   is an upper value, not a central one;
#: * intercept -0.40 m: the water table should be kept within 40 cm of the surface to prevent
#:   fire (Wösten et al. 2008, International Peat Congress abstract, checked); so no peat burns
#:   while the water table is within 0.40 m of the surface;
#: * consistency check (not a calibration): the mean LiDAR burn depth of 0.33 ± 0.18 m of the
#:   2006 fires (Ballhorn et al. 2009, abstract, checked) would need a mean fire-time water table
#:   of 0.73 m, and the 0.51 m mean burn depth of 1997 (Page et al. 2002: recalled, unchecked)
#:   one of 0.91 m; plausible for drought years in drained peat, not checked against records.
#:
#: Standard errors (0.20 m, 0.30) are judgement, chosen wide; no covariance.
DEFAULT_MODEL = DepthModel(
    intercept=-0.40,
    slope=1.0,
    intercept_se=0.20,
    slope_se=0.30,
    covariance=0.0,
    n=0,
    r2=math.nan,
    rmse=math.nan,
    method="default",
    confidence="default (low confidence)",
    se_method="judgement (no published uncertainty)",
    basis=(
        "project construction, not a published fit: slope 1 m/m (combustible layer above the water "
        "table deepens linearly as it falls: Hayasaka et al. 2016, abstract; Usup et al. 2004) and "
        "no burn while the water table is within 0.40 m of the surface (Wösten et al. 2008 fire "
        "threshold of 40 cm). Standard errors are judgement."
    ),
)


def user_model(intercept, slope, intercept_se=math.nan, slope_se=math.nan, covariance=0.0,
               basis: str = "user-supplied coefficients") -> DepthModel:
    """A :class:`DepthModel` from user coefficients ``a`` [m] and ``b`` [m/m], confidence ``"user"``."""
    values = {"intercept": intercept, "slope": slope, "intercept_se": intercept_se,
              "slope_se": slope_se, "covariance": covariance}
    clean = {}
    for name, value in values.items():
        try:
            v = float(value)
        except (TypeError, ValueError):
            raise PhysicalRangeError(f"water-table depth model: {name} must be a number, got {value!r}") from None
        if name in ("intercept", "slope") and not math.isfinite(v):
            raise PhysicalRangeError(f"water-table depth model: {name} must be a finite number, got {value!r}")
        if name.endswith("_se") and v < 0:
            raise PhysicalRangeError(f"water-table depth model: {name} must not be negative, got {value!r}")
        clean[name] = v
    notes = []
    if clean["slope"] < 0:
        notes.append("slope is negative: burn depth would shrink as the water table falls, against the "
                     "published relation (Hayasaka et al. 2016); check the sign convention")
    return DepthModel(n=0, r2=math.nan, rmse=math.nan, method="user", confidence="user",
                      se_method="user-supplied" if math.isfinite(clean["slope_se"]) else "none",
                      notes=tuple(notes), basis=basis, **clean)


def _coefficients(model_or_a_b):
    if isinstance(model_or_a_b, DepthModel):
        return model_or_a_b.intercept, model_or_a_b.slope
    try:
        a, b = model_or_a_b
    except (TypeError, ValueError):
        raise PhysicalRangeError(
            f"depth model: expected a DepthModel or a pair (intercept, slope), got {model_or_a_b!r}"
        ) from None
    return np.asarray(a, dtype="float64"), np.asarray(b, dtype="float64")


def predict_depth(model_or_a_b, water_table_m, thickness_m=None, edge_distance_m=None) -> np.ndarray:
    """Burn depth from the water-table depth: ``d = clip(a + b w, 0, T)``.

    Parameters
    ----------
    model_or_a_b : DepthModel or (float or array_like, float or array_like)
        The coefficients: intercept ``a`` [m] and slope ``b`` [m/m]. Arrays broadcast against
        ``water_table_m`` (per-pixel coefficient sets, e.g. first and repeat fires).
    water_table_m : array_like
        Depth of the water table below the surface at fire time [m, positive down]. NaN is nodata.
    thickness_m : array_like, optional
        Peat thickness [m]; the depth never exceeds it. NaN thickness means unknown (no cap), as in
        :func:`peatburn.science.peat.cap_depth`; a negative thickness is read as 0.
    edge_distance_m : array_like, optional
        Distance from the scar edge [m]: required when the model has an edge taper
        (``edge_taper_m`` > 0), which multiplies ``a + b w`` by ``1 - exp(-e / L)``.
        A model with a thin-peat factor (``thickness_taper_m`` > 0) multiplies it by
        ``1 - exp(-T / L_T)`` too (:func:`covariate_factor`; ``thickness_m`` required).

    Returns
    -------
    numpy.ndarray
        Burn depth [m], >= 0; NaN where the water table is NaN.

    References
    ----------
    Linear relation with the water table: Usup et al. (2004); Wösten et al. (2008); Hayasaka et
    al. (2016). Cap at the peat thickness: Page et al. (2002) and Ballhorn et al. (2009) (burn
    depth times area is a volume of peat that existed).
    """
    a, b = _coefficients(model_or_a_b)
    w = np.asarray(water_table_m, dtype="float64")
    f = covariate_factor(model_or_a_b, edge_distance_m, thickness_m)
    with np.errstate(invalid="ignore"):
        d = np.maximum((a + b * w) * f, 0.0)  # NaN propagates through np.maximum
        if thickness_m is not None:
            t = np.maximum(np.asarray(thickness_m, dtype="float64"), 0.0)
            d = np.where(np.isnan(t), d, np.minimum(d, t))
    return np.asarray(d, dtype="float64")


def predict_depth_grouped(models: Mapping, group, water_table_m, thickness_m=None, default=None) -> np.ndarray:
    """Burn depth with a coefficient set chosen per pixel by a group label (e.g. fire count).

    Parameters
    ----------
    models : mapping of label to DepthModel
        For example ``{1: first_fire_model, 2: repeat_fire_model}`` from
        :func:`fit_depth_models_by_group`.
    group : array_like
        Label per pixel, broadcast against ``water_table_m``.
    water_table_m, thickness_m : array_like
        As in :func:`predict_depth` [m].
    default : DepthModel, optional
        For labels not in ``models``; without it those pixels are NaN.

    Returns
    -------
    numpy.ndarray
        Burn depth [m].
    """
    w = np.asarray(water_table_m, dtype="float64")
    g = np.broadcast_to(np.asarray(group), w.shape)
    a = np.full(w.shape, np.nan if default is None else default.intercept)
    b = np.full(w.shape, np.nan if default is None else default.slope)
    for label, model in models.items():
        hit = g == label
        a[hit] = model.intercept
        b[hit] = model.slope
    return predict_depth((a, b), w, thickness_m)


# ----------------------------------------------------------------------------- checks


def check_water_table(values, what: str) -> list[str]:
    """Check water-table depths for the sign convention and the unit before they are used.

    Parameters
    ----------
    values : array_like
        Water-table depth below the surface [m, positive down]; NaN is nodata and ignored.
    what : str
        The input's name (config key, file), used in every message.

    Returns
    -------
    list of str
        Warnings (empty when nothing looks odd): some values above the surface, water tables
        deeper than :data:`DEEP_WATER_TABLE_WARN_M`, no valid value.

    Raises
    ------
    PhysicalRangeError
        * any |value| > :data:`MAX_ABS_WATER_TABLE_M` (10 m): probably centimetres or millimetres
          read as metres, or an undeclared nodata value such as -9999;
        * more than half of the values negative: the data are probably a water-table *level*
          (negative below the surface, as dipwell records and papers often give it), not a depth.

    Notes
    -----
    Thresholds are common practice. Tropical peat water tables range from about 1 m above the
    surface in floods to below 40 cm under it in dry seasons (Wösten et al. 2008, checked
    abstract); at fire time water above the surface should be rare.
    """
    v = np.asarray(values, dtype="float64").ravel()
    f = v[np.isfinite(v)]
    if f.size == 0:
        return [f"{what}: no valid water-table value (all nodata)"]
    warnings: list[str] = []
    big = np.abs(f) > MAX_ABS_WATER_TABLE_M
    if big.any():
        worst = f[np.argmax(np.abs(f))]
        raise PhysicalRangeError(
            f"{what}: {int(big.sum())} of {f.size} water-table values are more than "
            f"{MAX_ABS_WATER_TABLE_M:g} m from the surface (largest {worst:g}); the water-table depth is "
            f"read in metres, and peat water tables lie within a few metres of the surface. If the data "
            f"are in centimetres or millimetres, give their units (e.g. \"cm\") or divide by 100 or 1000; "
            f"if {worst:g} is a nodata value, declare it as the file's nodata"
        )
    neg = f < 0
    share = float(neg.mean())
    if share > NEGATIVE_SHARE_ERROR:
        raise PhysicalRangeError(
            f"{what}: {share:.0%} of the water-table values are negative (median {np.median(f):g} m). "
            f"peatburn reads the water table as a depth below the surface, positive down (0.6 = 60 cm "
            f"below the surface); a negative value means water standing above the surface, which "
            f"should be rare at fire time. These look like a water-table level with the opposite sign "
            f"(negative below the surface, as dipwell records often give it): multiply the values by -1"
        )
    if share > NEGATIVE_SHARE_WARN:
        warnings.append(
            f"{what}: {share:.0%} of the water-table values are negative (water above the surface, down "
            f"to {f.min():g} m); they give zero burn depth. Check the sign convention (positive down)"
        )
    deep = f > DEEP_WATER_TABLE_WARN_M
    if deep.any():
        warnings.append(
            f"{what}: {int(deep.sum())} of {f.size} water-table values are deeper than "
            f"{DEEP_WATER_TABLE_WARN_M:g} m below the surface (deepest {f.max():g} m); unusual for peat. "
            f"Check the units (m) and whether these are canal or open-water pixels"
        )
    return warnings


# ----------------------------------------------------------------------------- fitting


def _theil_sen(w, d, rng, *, pairs=None):
    """Theil-Sen slope (median of pairwise slopes) and intercept median(d - b w).

    ``pairs``: (i, j) index arrays to use; default (or an int: the number of random pairs) all
    pairs up to _EXACT_PAIRS_MAX, else _SAMPLED_PAIRS (or that many) random pairs.
    """
    n = w.size
    if pairs is None or isinstance(pairs, int):
        if n * (n - 1) // 2 <= _EXACT_PAIRS_MAX:
            i, j = np.triu_indices(n, 1)
        else:
            m = _SAMPLED_PAIRS if pairs is None else pairs
            i = rng.integers(0, n, m)
            j = rng.integers(0, n, m)
    else:
        i, j = pairs
    dx = w[j] - w[i]
    keep = dx != 0
    if not keep.any():
        return math.nan, math.nan
    slopes = (d[j][keep] - d[i][keep]) / dx[keep]
    b = float(np.median(slopes))
    a = float(np.median(d - b * w))
    return a, b


def _huber(w, d, *, c=HUBER_C, max_iter=100, tol=1e-10, start=None):
    """Huber M-estimate of (a, b) by IRLS with the residual scale re-estimated by the NMAD."""
    X = np.column_stack([np.ones_like(w), w])
    if start is None:
        beta = np.linalg.lstsq(X, d, rcond=None)[0]
    else:
        beta = np.asarray(start, dtype="float64")
    for _ in range(max_iter):
        r = d - X @ beta
        s = NMAD_CONSTANT * float(np.median(np.abs(r - np.median(r))))
        if not s > 0:
            break  # more than half the points on the line: it is the fit
        u = np.abs(r) / s
        wt = np.where(u <= c, 1.0, c / np.maximum(u, 1e-300))
        Xw = X * wt[:, None]
        new = np.linalg.solve(X.T @ Xw, Xw.T @ d)
        done = np.max(np.abs(new - beta)) <= tol * (1.0 + np.max(np.abs(beta)))
        beta = new
        if done:
            break
    return float(beta[0]), float(beta[1])


@dataclass(frozen=True)
class _Spec:
    """How to fit: robust method, target, screening cutoff, water-table error [m] (0: none)."""

    method: str
    target: str = "mean"
    screen_k: float = SCREEN_K
    sigma_u: float = 0.0


def _robust(spec, w, d, rng, start=None, pairs=None):
    if spec.method == "theil-sen":
        return _theil_sen(w, d, rng, pairs=pairs)
    return _huber(w, d, start=start)


def _least_squares(w, d, sigma_u=0.0, f=None):
    """Least squares line; with ``sigma_u`` > 0 the method-of-moments errors-in-variables slope
    ``S_wd / (S_ww - n sigma_u^2)`` (Fuller 1987, section 1.1). With an edge-taper factor ``f`` per
    pair the model is ``d = f (a + b w)``: least squares on the columns (f, f w), the error variance
    ``sigma_u^2 sum(f^2)`` taken off the (f w, f w) moment. Returns (a, b, reliability)."""
    n = w.size
    wm, dm = float(w.mean()), float(d.mean())
    sww = float(np.sum((w - wm) ** 2))
    if not sww > 0:
        return math.nan, math.nan, math.nan
    rel = (sww - n * sigma_u * sigma_u) / sww
    if not rel > 0:
        return math.nan, math.nan, rel
    if f is not None:
        fw = f * w
        m = np.array([[f @ f, f @ fw], [f @ fw, fw @ fw - sigma_u * sigma_u * (f @ f)]])
        try:
            a, b = np.linalg.solve(m, np.array([f @ d, fw @ d]))
        except np.linalg.LinAlgError:
            return math.nan, math.nan, rel
        return float(a), float(b), rel
    b = float(np.sum((w - wm) * (d - dm))) / (sww - n * sigma_u * sigma_u)
    return dm - b * wm, b, rel


def _screen(w, d, a, b, k):
    """Mask of pairs kept by the artefact screen around the robust line (a, b).

    Each side of the median residual has its own robust scale (NMAD of the deviations on that
    side), so the long side of a skewed scatter is not cut as if it were the short one; for
    symmetric residuals both equal the NMAD. Skew-aware cutoffs follow the idea of Hubert &
    Vandervieren (2008, Comput. Stat. Data Anal. 52:5186; recalled, unchecked); the form here is
    this project's.
    """
    r = d - (a + b * w)
    med = float(np.median(r))
    dev = r - med
    keep = np.ones(w.size, dtype=bool)
    for side in (dev > 0, dev < 0):
        if side.any():
            s = NMAD_CONSTANT * float(np.median(np.abs(dev[side])))
            if s > 0:
                keep &= ~(side & (np.abs(dev) > k * s))
    return keep


def _estimate(spec, w, d, rng, start=None, pairs=None, f=None):
    """(a, b, n_screened, reliability) of the fit ``spec`` on the pairs (w, d) (edge-taper factor ``f``)."""
    a, b = _robust(spec, w, d, rng, start, pairs)
    if spec.target == "median" or not (math.isfinite(a) and math.isfinite(b)):
        return a, b, 0, math.nan
    keep = _screen(w, d, a, b, spec.screen_k)
    a, b, rel = _least_squares(w[keep], d[keep], spec.sigma_u, None if f is None else f[keep])
    return a, b, int(w.size - keep.sum()), rel


def edge_taper(edge_distance_m, taper_m) -> np.ndarray:
    """Share of the full burn depth at a distance from the scar edge: ``1 - exp(-e / L)`` [-].

    Burn depth tapers to zero at scar edges (shallow burn where the fire front stopped); this
    saturating form, with the e-folding distance ``L`` [m] chosen by leave-scar-out
    cross-validation (:func:`select_edge_taper`), is a choice of this project, not a published
    curve. ``L = 0`` means no taper (1 everywhere); NaN distances give 1 (no information).
    """
    e = np.asarray(edge_distance_m, dtype="float64")
    if not taper_m > 0:
        return np.ones(e.shape)
    with np.errstate(invalid="ignore"):
        return np.where(np.isfinite(e), -np.expm1(-np.maximum(e, 0.0) / float(taper_m)), 1.0)


def thickness_taper(thickness_m, taper_m) -> np.ndarray:
    """Share of the full burn depth on peat of a given thickness: ``1 - exp(-T / L_T)`` [-].

    The thin-peat covariate of the depth model. Peat near its mineral substrate is wetter and
    richer in mineral matter. The probability that organic soil ignites depends on its moisture
    and inorganic content (Frandsen 1997, Can. J. For. Res. 27:1471-1477, abstract checked; that it
    falls as the inorganic content rises is recalled, unchecked), and the odds of sustained
    smouldering fall by 19.3 % for each 5 % more moisture (Reardon, Hungerford & Ryan 2007, Int. J.
    Wildland Fire 16:107-118, abstract checked, for root-mat soils; there a little more mineral
    content *raised* the odds, so the mineral effect is not one-signed). On thin peat the wet base
    layer is a larger share of the column, so the burn may stay further from the line than the
    hard cap at ``T`` alone gives: a hypothesis the cross-validation tests, not a premise. The
    saturating form (0 at no peat, 1 on thick peat, the scale ``L_T`` [m] chosen by leave-scar-out
    cross-validation in :func:`select_covariates`) is a choice of this project, the same form as
    :func:`edge_taper`, not a published curve. ``L_T = 0``: no factor (1 everywhere); NaN
    (unknown) thickness gives 1; a negative thickness is read as 0.

    Parameters
    ----------
    thickness_m : array_like
        Peat thickness [m].
    taper_m : float
        Scale ``L_T`` [m].

    Returns
    -------
    numpy.ndarray
        Factor in [0, 1] [-].

    References
    ----------
    Frandsen, W. H. (1997). Ignition probability of organic soils. Can. J. For. Res. 27:1471-1477.
    Reardon, J., Hungerford, R. & Ryan, K. (2007). Factors affecting sustained smouldering in organic
    soils from pocosin and pond pine woodland wetlands. Int. J. Wildland Fire 16:107-118.
    """
    return edge_taper(thickness_m, taper_m)


def covariate_factor(model, edge_distance_m=None, thickness_m=None):
    """The factor the covariates of ``model`` put on ``a + b w``: :func:`edge_taper` times
    :func:`thickness_taper` (1.0 when the model has neither) [-].

    Raises
    ------
    GridError
        The model has an edge taper and no edge distances, or a thin-peat factor and no thickness.
    """
    return _factor(float(getattr(model, "edge_taper_m", 0.0) or 0.0),
                   float(getattr(model, "thickness_taper_m", 0.0) or 0.0), edge_distance_m, thickness_m)


def _factor(taper: float, thick: float, edge_distance_m, thickness_m):
    f = 1.0
    if taper > 0:
        if edge_distance_m is None:
            raise GridError("depth model: this model tapers the depth to the scar edge; give the edge distances")
        f = edge_taper(edge_distance_m, taper)
    if thick > 0:
        if thickness_m is None:
            raise GridError("depth model: this model has a thin-peat factor; give the peat thickness "
                            "(peat.thickness)")
        f = f * thickness_taper(thickness_m, thick)
    return f


def covariate_labels(edge_taper_m: float, thickness_taper_m: float) -> tuple[str, ...]:
    out = []
    if edge_taper_m and edge_taper_m > 0:
        out.append(f"edge {edge_taper_m:g} m")
    if thickness_taper_m and thickness_taper_m > 0:
        out.append(f"thickness {thickness_taper_m:g} m")
    return tuple(out)


def _as_pairs(water_table_m, depth_m, cluster, thickness_m=None, edge_distance_m=None):
    """Valid pairs: (w, d, scar labels, pairs censored at the thickness, edge distances, thickness) of the kept
    pairs (None for what was not given)."""
    w = np.asarray(water_table_m, dtype="float64").ravel()
    d = np.asarray(depth_m, dtype="float64").ravel()
    if w.size != d.size:
        raise GridError(f"water-table depth fit: {w.size} water-table values but {d.size} burn depths; "
                        f"sample both on the same pixels")
    ok = np.isfinite(w) & np.isfinite(d)
    n_censored = 0
    t = None
    if thickness_m is not None:
        t = np.asarray(thickness_m, dtype="float64").ravel() if np.ndim(thickness_m) \
            else np.full(w.size, float(thickness_m))
        if t.size != w.size:
            raise GridError(f"water-table depth fit: {t.size} peat thicknesses for {w.size} pixels; give one per pixel")
        with np.errstate(invalid="ignore"):
            capped = ok & np.isfinite(t) & (d >= np.maximum(t, 0.0))
        n_censored = int(capped.sum())
        ok &= ~capped
    c = None
    if cluster is not None:
        c = np.asarray(cluster).ravel()
        if c.size != w.size:
            raise GridError(f"water-table depth fit: {c.size} scar labels for {w.size} pixels; give one per pixel")
        if c.dtype.kind == "f":
            ok &= np.isfinite(c)
        c = c[ok]
    e = None
    if edge_distance_m is not None:
        e = np.asarray(edge_distance_m, dtype="float64").ravel()
        if e.size != w.size:
            raise GridError(f"water-table depth fit: {e.size} edge distances for {w.size} pixels; give one per pixel")
        e = e[ok]
    return w[ok], d[ok], c, n_censored, e, (None if t is None else t[ok])


def _bootstrap(spec, w, d, c, rng, *, n_boot, boot_size, start, f=None):
    """Bootstrap replicates of (a, b); returns (reps, scale, description, n_clusters)."""
    n = w.size
    reps = []
    if c is not None:
        labels, inverse = np.unique(c, return_inverse=True)
        k = labels.size
    else:
        k = 0
    if k >= 2:
        # cluster bootstrap: resample scars; thin each scar's pixels so a replicate has about boot_size
        inverse = inverse.ravel()
        # each scar's pixel indices in ascending order (one sort, not one scan per scar)
        members = np.split(np.argsort(inverse, kind="stable"), np.cumsum(np.bincount(inverse, minlength=k))[:-1])
        keep_share = min(1.0, boot_size / n)
        thinned = []
        for m in members:
            take = max(1, int(round(m.size * keep_share)))
            thinned.append(m if take >= m.size else rng.choice(m, take, replace=False))
        for _ in range(n_boot):
            pick = rng.integers(0, k, k)
            idx = np.concatenate([thinned[g] for g in pick])
            reps.append(_estimate(spec, w[idx], d[idx], rng, start, _BOOT_SAMPLED_PAIRS,
                                  None if f is None else f[idx])[:2])
        scale = 1.0
        desc = (f"cluster bootstrap over {k} scars ({n_boot} replicates"
                + (f", pixels thinned to {keep_share:.3g} of each scar" if keep_share < 1 else "") + ")")
    else:
        m = min(n, boot_size)
        pairs = (np.triu_indices(m, 1) if spec.method == "theil-sen" and m * (m - 1) // 2 <= _EXACT_PAIRS_MAX
                 else None)
        for _ in range(n_boot):
            idx = rng.integers(0, n, m)
            reps.append(_estimate(spec, w[idx], d[idx], rng, start, pairs, None if f is None else f[idx])[:2])
        scale = math.sqrt(m / n)
        desc = (f"pixel bootstrap ({n_boot} replicates"
                + (f" of {m} of {n} pixels, SE scaled by sqrt(m/n)" if m < n else "")
                + "; assumes independent pixels, overconfident for spatially autocorrelated scars)")
    reps = np.asarray(reps, dtype="float64").reshape(-1, 2)
    reps = reps[np.all(np.isfinite(reps), axis=1)]
    return reps, scale, desc, k


def _describe(spec, taper_m: float = 0.0, thickness_taper_m: float = 0.0) -> str:
    robust = "Theil-Sen" if spec.method == "theil-sen" else "Huber"
    if spec.target == "median":
        return f"{robust} line (conditional median)"
    text = (f"least squares on pairs screened by a {robust} line at {spec.screen_k:g} NMAD "
            f"(conditional mean; Rousseeuw & Leroy 1987)")
    if spec.sigma_u > 0:
        text = (f"errors-in-variables least squares (method of moments, Fuller 1987; water-table error "
                f"{spec.sigma_u:g} m) on pairs screened by a {robust} line at {spec.screen_k:g} NMAD")
    if taper_m > 0:
        text += f"; depth tapered to the scar edge, x (1 - exp(-distance / {taper_m:g} m))"
    if thickness_taper_m > 0:
        text += f"; thin-peat factor x (1 - exp(-thickness / {thickness_taper_m:g} m))"
    return text


def fit_depth_model(water_table_m, depth_m, *, method: str = "theil-sen", max_samples: int = 200_000,
                    seed: int = 0, n_boot: int = 200, cluster=None, boot_size: int | None = None,
                    target: str = "mean", thickness_m=None, water_table_error_m: float | None = None,
                    screen_k: float = SCREEN_K, edge_distance_m=None, edge_taper_m: float = 0.0,
                    thickness_taper_m: float = 0.0) -> DepthModel:
    """Fit ``d = a + b w`` on pixels (or plots) where both burn depth and water table exist.

    Parameters
    ----------
    water_table_m : array_like
        Water-table depth at fire time [m, positive down].
    depth_m : array_like
        Measured burn depth (survey difference or field plot) [m], same size. Non-finite pairs
        are dropped. Do not pre-clip the depths at zero: that biases the fit (see
        :mod:`peatburn.science.survey`).
    method : {"theil-sen", "huber"}
        Robust estimator (module docstring): the line itself with ``target="median"``, the
        artefact screen with ``target="mean"``.
    max_samples : int
        Pairs used at most; above it a seeded random sample is drawn.
    seed : int
        Seed of the sample and the bootstrap; the same inputs and seed give the same result.
    n_boot : int
        Bootstrap replicates for the standard errors (0: no SEs).
    cluster : array_like, optional
        Scar (or plot cluster) label per pair, same size: the bootstrap then resamples whole
        scars, which respects the spatial correlation of pixels within a scar.
    boot_size : int, optional
        Points per bootstrap replicate at most (default 600 for Theil-Sen, 5000 for Huber).
    target : {"mean", "median"}
        What the line predicts (module docstring). Totals need the mean.
    thickness_m : array_like or float, optional
        Peat thickness per pair [m]: pairs whose depth reached it (capped, so censored) are left
        out of the fit. NaN means unknown (not censored).
    water_table_error_m : float, optional
        Standard deviation of the random error of the water table at the fitted pairs [m]: the
        slope is corrected for regression dilution (errors-in-variables, ``target="mean"`` only).
    screen_k : float
        Screening cutoff in NMADs of the residuals (``target="mean"``).
    edge_distance_m : array_like, optional
        Distance of each pair from its scar's edge [m]; needed when ``edge_taper_m`` > 0.
    edge_taper_m : float
        E-folding distance of the edge taper [m] (:func:`edge_taper`): the model becomes
        ``d = (1 - exp(-e / L)) (a + b w)``, fitted by least squares on the screened pairs
        (``target="mean"`` only). 0: no taper. Choose it with :func:`select_edge_taper`.
    thickness_taper_m : float
        Scale of the thin-peat factor [m] (:func:`thickness_taper`; needs ``thickness_m``): the
        factor ``1 - exp(-T / L_T)`` multiplies ``a + b w`` like the edge taper (both multiply
        when both are given). 0: none. Choose it with :func:`select_covariates`.

    Returns
    -------
    DepthModel
        ``confidence="fitted"``; the fit in words in ``estimator``; cautions in ``notes``.

    Raises
    ------
    GridError
        Fewer than :data:`MIN_FIT_SAMPLES` valid pairs, or no spread in the water table, or a
        water-table error so large that the corrected slope is unstable.
    PhysicalRangeError
        Unknown ``method`` or ``target``, negative water-table error, errors-in-variables with
        ``target="median"``.

    References
    ----------
    Theil (1950); Sen (1968); Huber (1964); Holland & Welsch (1977); Rousseeuw & Leroy (1987);
    Duan (1983); Fuller (1987); Efron & Tibshirani (1993); Field & Welsh (2007); Bickel et al.
    (1997). See the module docstring.
    """
    if method not in METHODS:
        raise PhysicalRangeError(f"water-table depth fit: unknown method {method!r}; "
                                 f"choose one of {', '.join(METHODS)}")
    if target not in TARGETS:
        raise PhysicalRangeError(f"water-table depth fit: unknown target {target!r}; "
                                 f"choose one of {', '.join(TARGETS)}")
    sigma_u = 0.0 if water_table_error_m is None else float(water_table_error_m)
    if not (sigma_u >= 0 and math.isfinite(sigma_u)):
        raise PhysicalRangeError(f"water-table depth fit: water-table error must be a number >= 0 m, "
                                 f"got {water_table_error_m!r}")
    if sigma_u > 0 and target == "median":
        raise PhysicalRangeError("water-table depth fit: the errors-in-variables correction works on the "
                                 "least-squares (mean) fit; use target=\"mean\" or give no water-table error")
    taper = float(edge_taper_m or 0.0)
    if taper > 0 and (target == "median" or edge_distance_m is None):
        raise PhysicalRangeError("water-table depth fit: an edge taper needs the edge distance of every pair and "
                                 "the mean fit (target=\"mean\")")
    thin = float(thickness_taper_m or 0.0)
    if thin > 0 and (target == "median" or thickness_m is None):
        raise PhysicalRangeError("water-table depth fit: a thin-peat factor needs the peat thickness of every pair "
                                 "and the mean fit (target=\"mean\")")
    spec = _Spec(method, target, float(screen_k), sigma_u)
    w, d, c, n_censored, e, t = _as_pairs(water_table_m, depth_m, cluster, thickness_m,
                                          edge_distance_m if taper > 0 else None)
    f_all = _factor(taper, thin, e, t) if taper > 0 or thin > 0 else None
    n_valid = w.size
    if n_valid < MIN_FIT_SAMPLES:
        raise GridError(
            f"water-table depth fit: only {n_valid} pixel(s) or plot(s) have both a burn depth and a "
            f"water table (at least {MIN_FIT_SAMPLES} needed); give user coefficients or rely on the defaults"
        )
    rng = np.random.default_rng(seed)
    notes: list[str] = []
    if n_censored:
        notes.append(f"{n_censored} pair(s) capped at the peat thickness (censored) left out of the fit")
    if n_valid > max_samples:
        idx = np.sort(rng.choice(n_valid, int(max_samples), replace=False))
        w, d = w[idx], d[idx]
        c = None if c is None else c[idx]
        f_all = None if f_all is None else f_all[idx]
        notes.append(f"fitted on a random sample of {int(max_samples)} of {n_valid} pairs (seed {seed})")
    lo, hi = float(w.min()), float(w.max())
    if not hi > lo:
        raise GridError(
            f"water-table depth fit: every pair has the same water table ({lo:g} m); the slope cannot be "
            f"fitted. Give user coefficients or rely on the defaults"
        )
    start = _theil_sen(w, d, rng) if method == "huber" else None
    f = f_all
    a, b, n_screened, rel = _estimate(spec, w, d, rng, start, None, f)
    if sigma_u > 0 and not rel >= MIN_RELIABILITY:
        raise GridError(
            f"water-table depth fit: a water-table error of {sigma_u:g} m is "
            f"{'larger than' if not rel > 0 else 'too large for'} the spread of the fitted water tables "
            f"(reliability {rel:.2f} < {MIN_RELIABILITY:g}); the corrected slope would be unstable. Check "
            f"the error, or fit without it"
        )
    resid = d - (a + b * w) * (1.0 if f is None else f)
    ss_tot = float(np.sum((d - d.mean()) ** 2))
    r2 = 1.0 - float(np.sum(resid**2)) / ss_tot if ss_tot > 0 else math.nan
    rmse = float(np.sqrt(np.mean(resid**2)))
    nmad = NMAD_CONSTANT * float(np.median(np.abs(resid - np.median(resid))))

    se_a = se_b = cov = math.nan
    se_method = "none (n_boot = 0)"
    k = 0
    if n_boot > 0:
        size = int(boot_size or _DEFAULT_BOOT_SIZE[method])
        reps, scale, se_method, k = _bootstrap(spec, w, d, c, rng, n_boot=int(n_boot), boot_size=size,
                                               start=start if method == "huber" else None, f=f)
        if reps.shape[0] >= 2:
            cm = np.cov(reps.T, ddof=1) * scale**2
            se_a, se_b, cov = float(np.sqrt(cm[0, 0])), float(np.sqrt(cm[1, 1])), float(cm[0, 1])
    if n_screened:
        notes.append(f"{n_screened} of {w.size} pairs ({n_screened / w.size:.1%}) screened out as artefacts "
                     f"(residual beyond {screen_k:g} NMAD of the robust line)")
    if sigma_u > 0:
        notes.append(f"slope corrected for a water-table error of {sigma_u:g} m (reliability {rel:.2f}): "
                     f"right only where the model is applied to a better-known water table")
    if c is not None and 0 < k < MIN_CLUSTERS:
        notes.append(f"only {k} scar(s): the cluster bootstrap standard errors are unreliable")
    if c is None and n_boot > 0:
        notes.append("standard errors assume independent pixels; give scar labels for a cluster bootstrap")
    if n_valid < FEW_SAMPLES:
        notes.append(f"few samples ({n_valid}): coefficients are uncertain")
    if hi - lo < NARROW_RANGE_M:
        notes.append(f"water table spans only {hi - lo:.2f} m ({lo:g} to {hi:g} m): slope poorly constrained")
    if b < 0:
        notes.append("fitted slope is negative: burn depth shrinks as the water table falls, against the "
                     "published relation (Hayasaka et al. 2016); check the sign convention of the water table")
    notes.append(f"fitted for water tables from {lo:.3g} to {hi:.3g} m; outside that range the model extrapolates")
    return DepthModel(
        intercept=a, slope=b, intercept_se=se_a, slope_se=se_b, covariance=cov, n=int(w.size), r2=r2,
        rmse=rmse, method=method, confidence="fitted", se_method=se_method, water_table_range=(lo, hi),
        n_clusters=int(k), residual_nmad=nmad, notes=tuple(notes),
        basis=f"{_describe(spec, taper, thin)} on {w.size} pairs of burn depth and water-table depth",
        target=target, estimator=_describe(spec, taper, thin), n_screened=n_screened, n_censored=n_censored,
        water_table_error_m=sigma_u if sigma_u > 0 else math.nan, edge_taper_m=taper, thickness_taper_m=thin,
    )


def fit_depth_models_by_group(water_table_m, depth_m, group, *, min_n: int = 200,
                              min_range_m: float = NARROW_RANGE_M, cluster=None,
                              min_scars: int = MIN_SCARS_PER_GROUP, **fit_kwargs) -> dict:
    """Separate coefficient sets per group (e.g. first fire vs repeat fire) where the data allow.

    A group gets its own fit when it has at least ``min_n`` valid pairs spanning at least
    ``min_range_m`` of water table and, when scar labels are given, at least ``min_scars`` scars
    (:data:`MIN_SCARS_PER_GROUP`: pixels of one scar are not independent, so it is the scars that
    count; a model from 2 scars has a pixel-bootstrap slope error many times too small); otherwise
    it takes the pooled fit of all groups, with ``method="pooled"`` and a note. Repeat fires burn peat already thinned, dried and exposed by
    earlier fires, so their relation may differ (a reason to fit them apart, not a published
    coefficient).

    Parameters
    ----------
    water_table_m, depth_m : array_like
        As in :func:`fit_depth_model` [m].
    group : array_like
        Group label per pair (fire count, or a first/repeat flag); NaN or None labels are dropped.
    min_n : int
        Fewest pairs for a group of its own.
    min_range_m : float
        Narrowest water-table range [m] for a group of its own.
    cluster : array_like, optional
        Scar labels per pair (see :func:`fit_depth_model`).
    min_scars : int
        Fewest scars for a group of its own (only when ``cluster`` is given).
    **fit_kwargs
        Passed to :func:`fit_depth_model` (method, seed, n_boot...).

    Returns
    -------
    dict
        ``{"pooled": DepthModel, label: DepthModel, ...}``.
    """
    w = np.asarray(water_table_m, dtype="float64").ravel()
    d = np.asarray(depth_m, dtype="float64").ravel()
    g = np.asarray(group, dtype=object).ravel()
    if g.size != w.size:
        raise GridError(f"water-table depth fit: {g.size} group labels for {w.size} pixels; give one per pixel")
    c = None if cluster is None else np.asarray(cluster).ravel()
    has_label = np.array([x is not None and not (isinstance(x, float) and math.isnan(x)) for x in g], dtype=bool)
    ok = np.isfinite(w) & np.isfinite(d) & has_label
    pooled = fit_depth_model(w[ok], d[ok], cluster=None if c is None else c[ok], **fit_kwargs)
    out = {"pooled": pooled}
    for label in sorted(set(g[ok].tolist()), key=str):
        sel = ok & (g == label)
        n = int(sel.sum())
        span = float(w[sel].max() - w[sel].min()) if n else 0.0
        scars = len(np.unique(c[sel])) if c is not None else None
        if n >= min_n and span >= min_range_m and (scars is None or scars >= min_scars):
            out[label] = fit_depth_model(w[sel], d[sel], cluster=None if c is None else c[sel], **fit_kwargs)
        else:
            why = (f"{n} pairs" if n < min_n else f"a water-table range of {span:.2f} m" if span < min_range_m
                   else f"{scars} scar(s) (fewer than {min_scars})")
            out[label] = replace(
                pooled, method="pooled",
                notes=pooled.notes + (f"group {label!r} has {why}: it uses the pooled fit",),
                basis=pooled.basis + f" (pooled; group {label!r} too small for its own fit)",
            )
    return out


# ----------------------------------------------------------------------------- cross-validation


def scar_cross_validation(water_table_m, depth_m, scar, *, weight=None, thickness_m=None,
                          n_folds: int = CV_FOLDS, seed: int = 0, edge_distance_m=None, **fit_kwargs) -> dict:
    """Leave-scar-out prediction error of the water-table depth model, per scar.

    The scars are shuffled (seeded) and dealt into ``min(n_folds, scars)`` folds; each fold's
    scars are predicted by a model fitted on the other folds' scars (leave-one-scar-out when
    there are no more scars than folds). Whole scars are left out, never single pixels: pixels of
    a scar share its conditions, so a pixel-wise split leaks the answer and understates the error
    (Roberts et al. 2017). For each held-out scar ``s`` the predicted and observed sums
    ``P_s = sum(weight x clip(a + b w, 0, T))`` and ``O_s = sum(weight x d)`` are compared.

    Parameters
    ----------
    water_table_m, depth_m : array_like
        Pairs as in :func:`fit_depth_model` [m].
    scar : array_like
        Scar label per pair.
    weight : array_like, optional
        Per-pair weight turning depth into the quantity of interest, e.g. bulk density x carbon
        fraction x pixel area for carbon [kg m-1]; default 1 (depth sums [m]).
    thickness_m : array_like or float, optional
        Peat thickness [m]: caps the predictions and censors the fit (:func:`fit_depth_model`).
    n_folds : int
        Folds at most (:data:`CV_FOLDS`).
    edge_distance_m : array_like, optional
        Distance from the scar edge [m] per pair, for a model with ``edge_taper_m`` in ``fit_kwargs``.
    seed : int
        Seed of the fold assignment and of the fits.
    **fit_kwargs
        Passed to :func:`fit_depth_model` (method, target, water_table_error_m...); the
        bootstrap is switched off inside the folds.

    With ``target="mean"`` (the default), pairs that the artefact screen flags on all scars
    (canal edges, spoil banks: :data:`SCREEN_K`) are left out of both sums, so the error is
    measured against real burn depths.

    Returns
    -------
    dict
        ``n_scars``, ``n_folds``, ``n_screened`` (pairs left out of the sums as artefacts);
        ``bias`` = sum(P - O) / sum(O) and ``rmse`` =
        sqrt(mean((P_s - O_s)^2)) / mean(O_s), both relative [-]; ``rel_sd`` and ``rel_rmse``
        (standard deviation and root mean square of the per-scar relative errors
        (P_s - O_s) / O_s, each scar counting once whatever its size), ``rel_q05``, ``rel_q95``
        (their 5th and 95th percentiles); ``scar``, ``observed``, ``predicted`` (arrays per scar); ``method``
        (text). Scars of a fold whose training set cannot be fitted are skipped (``n_skipped``).

    Raises
    ------
    GridError
        Fewer than 3 scars with valid pairs, or sizes that do not match.

    References
    ----------
    Roberts, D. R. et al. (2017). Ecography 40:913-929 (blocked cross-validation). Hastie, T.,
    Tibshirani, R. & Friedman, J. (2009). The Elements of Statistical Learning, 2nd ed., section
    7.10 (K-fold cross-validation; recalled, unchecked).
    """
    w = np.asarray(water_table_m, dtype="float64").ravel()
    d = np.asarray(depth_m, dtype="float64").ravel()
    g = np.asarray(scar).ravel()
    if not (w.size == d.size == g.size):
        raise GridError(f"scar cross-validation: {w.size} water tables, {d.size} depths and {g.size} scar labels; "
                        f"give one of each per pixel")
    wt_ = np.ones(w.size) if weight is None else np.broadcast_to(np.asarray(weight, dtype="float64"), w.shape).ravel()
    t = None if thickness_m is None else np.broadcast_to(np.asarray(thickness_m, dtype="float64"), w.shape).ravel()
    e = None if edge_distance_m is None else np.asarray(edge_distance_m, dtype="float64").ravel()
    if e is not None and e.size != w.size:
        raise GridError(f"scar cross-validation: {e.size} edge distances for {w.size} pixels; give one per pixel")
    ok = np.isfinite(w) & np.isfinite(d) & np.isfinite(wt_)
    if g.dtype.kind == "f":
        ok &= np.isfinite(g)
    w, d, g, wt_ = w[ok], d[ok], g[ok], wt_[ok]
    t = None if t is None else t[ok]
    e = None if e is None else e[ok]
    labels, inverse = np.unique(g, return_inverse=True)
    inverse = inverse.ravel()
    k = labels.size
    if k < 3:
        raise GridError(f"scar cross-validation: {k} scar(s) with valid pairs; at least 3 are needed to leave "
                        f"whole scars out")
    rng = np.random.default_rng(seed)
    folds = min(int(n_folds), k)
    fold_of_scar = np.empty(k, dtype=int)
    fold_of_scar[rng.permutation(k)] = np.arange(k) % folds
    fold = fold_of_scar[inverse]
    fit_kwargs = {**fit_kwargs, "n_boot": 0, "seed": seed}
    # artefacts (canal edges, spoil banks) are no burn depth: the pairs the mean fit screens out on
    # all scars are left out of the held-out sums too, so the error is against the real depths
    artefact = np.zeros(w.size, dtype=bool)
    if fit_kwargs.get("target", "mean") == "mean" and w.size >= MIN_FIT_SAMPLES:
        spec = _Spec(fit_kwargs.get("method", "theil-sen"), "mean", float(fit_kwargs.get("screen_k", SCREEN_K)))
        a0, b0 = _robust(spec, w, d, rng)
        if math.isfinite(a0) and math.isfinite(b0):
            artefact = ~_screen(w, d, a0, b0, spec.screen_k)
    pred = np.full(w.size, np.nan)
    skipped = 0
    for f in range(folds):
        test = fold == f
        train = ~test
        try:
            m = fit_depth_model(w[train], d[train], cluster=None, thickness_m=None if t is None else t[train],
                                edge_distance_m=None if e is None else e[train], **fit_kwargs)
        except GridError:
            skipped += int(np.unique(inverse[test]).size)
            continue
        pred[test] = predict_depth(m, w[test], None if t is None else t[test], None if e is None else e[test])
    done = np.bincount(inverse, weights=np.isfinite(pred).astype(float), minlength=k) > 0
    real = np.where(artefact, 0.0, wt_)
    obs = np.bincount(inverse, weights=real * d, minlength=k)
    prd = np.bincount(inverse, weights=real * np.nan_to_num(pred), minlength=k)
    obs, prd, lab = obs[done], prd[done], labels[done]
    err = prd - obs
    out = {"n_scars": int(done.sum()), "n_folds": folds, "n_skipped": skipped, "n_screened": int(artefact.sum()),
           "scar": lab,
           "observed": obs, "predicted": prd,
           "method": (f"leave-scar-out cross-validation, {folds} folds of whole scars "
                      f"({'one scar per fold' if folds == k else f'{k} scars'}; seed {seed})")}
    nan = math.nan
    if obs.size == 0 or not obs.sum() != 0:
        out.update(bias=nan, rmse=nan, rel_sd=nan, rel_rmse=nan, rel_q05=nan, rel_q95=nan)
        return out
    with np.errstate(invalid="ignore", divide="ignore"):
        rel = np.where(obs > 0, err / obs, np.nan)
    rel = rel[np.isfinite(rel)]
    out.update(
        bias=float(err.sum() / obs.sum()),
        rmse=float(np.sqrt(np.mean(err**2)) / np.mean(obs)),
        rel_sd=float(np.std(rel, ddof=1)) if rel.size > 1 else nan,
        rel_rmse=float(np.sqrt(np.mean(rel**2))) if rel.size else nan,
        rel_q05=float(np.quantile(rel, 0.05)) if rel.size else nan,
        rel_q95=float(np.quantile(rel, 0.95)) if rel.size else nan,
    )
    return out


#: Edge-taper distances [m] :func:`select_edge_taper` tries besides none (project choice: from
#: about one pixel of a 10-30 m burned-area map to a few hundred metres).
EDGE_TAPER_CANDIDATES_M = (10.0, 20.0, 40.0, 80.0, 160.0)
#: Smallest relative drop of the leave-scar-out RMSE for which a taper is taken (project choice:
#: a covariate must earn its place).
MIN_CV_GAIN = 0.05


#: Thin-peat scales ``L_T`` [m] :func:`select_covariates` tries (project choice: from a quarter of a
#: metre, where only very thin peat is affected, to 2 m, about the thickness of shallow peat margins).
THICKNESS_TAPER_CANDIDATES_M = (0.25, 0.5, 1.0, 2.0)  # project choice


def select_edge_taper(water_table_m, depth_m, scar, edge_distance_m, *, candidates=EDGE_TAPER_CANDIDATES_M,
                      min_gain: float = MIN_CV_GAIN, **cv_kwargs) -> dict:
    """Choose the edge taper of the depth model by leave-scar-out cross-validation.

    :func:`select_covariates` with the edge distance as the only covariate: each candidate ``L``
    (and no taper) is cross-validated with the same folds and the best is taken only if it lowers
    the score of no taper by at least ``min_gain`` (relative) and by more than one standard error of
    the paired per-scar difference. Not a default.

    Returns
    -------
    dict
        ``taper_m`` (0 for none), ``rmse`` (candidate [m] -> leave-scar-out ``rel_rmse``) and
        ``cv`` (the cross-validation of the chosen model).
    """
    sel = select_covariates(water_table_m, depth_m, scar, edge_distance_m=edge_distance_m, edge="cv",
                            edge_candidates=candidates, min_gain=min_gain, **cv_kwargs)
    rmse = {e: v for (e, _), v in sel["tried"].items()}
    return {"taper_m": sel["edge_taper_m"], "rmse": rmse, "cv": sel["cv"]}


def _squared_relative_errors(cv) -> dict:
    """Per scar label, the squared relative error ((P - O) / O)^2 of a cross-validation (O > 0 only)."""
    o, p = np.asarray(cv["observed"]), np.asarray(cv["predicted"])
    keep = (o > 0) & np.isfinite(p)
    return dict(zip(np.asarray(cv["scar"])[keep].tolist(), (((p[keep] - o[keep]) / o[keep]) ** 2).tolist()))


def _beats_by_one_se(cand, cur) -> bool:
    """True when ``cand`` lowers the mean squared relative error of the scars by more than one standard
    error of the paired difference over the same scars (the one-standard-error rule of Hastie,
    Tibshirani & Friedman 2009, section 7.10, recalled, unchecked, applied to each step): a gain
    within the noise of a few scars with a tiny observed carbon (whose relative error is huge) is
    not taken."""
    a, b = _squared_relative_errors(cand), _squared_relative_errors(cur)
    common = sorted(set(a) & set(b), key=str)
    if len(common) < 3:
        return False
    diff = np.array([b[k] - a[k] for k in common])
    return bool(diff.mean() > diff.std(ddof=1) / math.sqrt(diff.size))


def select_covariates(water_table_m, depth_m, scar, *, edge_distance_m=None, thickness_m=None, edge=None,
                      thickness=None, edge_candidates=EDGE_TAPER_CANDIDATES_M,
                      thickness_candidates=THICKNESS_TAPER_CANDIDATES_M, min_gain: float = MIN_CV_GAIN,
                      **cv_kwargs) -> dict:
    """Choose the covariates of the depth model (edge taper, thin-peat factor) by leave-scar-out
    cross-validation, by forward stepwise selection.

    Every covariate set is scored by :func:`scar_cross_validation` with the same scar folds: the
    root mean square of the per-scar *relative* errors of carbon (``rel_rmse``: each scar counts
    once, so a bias of small scars or of scars on thin peat is seen, which the RMSE of absolute
    sums, dominated by the large scars, hides). Starting from the fixed covariates (or none), each
    step tries every candidate of every covariate still to choose and takes the best, only if it
    lowers the current score by at least ``min_gain`` (relative; a covariate must earn its place)
    **and** lowers the mean squared relative error by more than one standard error of the paired
    per-scar difference (so that a gain made by a few scars with a tiny observed carbon, whose
    relative errors are huge and noisy, is not taken); the selection stops at the first step that
    does not. Forward stepwise selection is common
    practice (Hastie, Tibshirani & Friedman 2009, section 3.3; recalled, unchecked); the gain
    threshold is this project's. Not a default: a covariate is only tried when asked for.

    Parameters
    ----------
    water_table_m, depth_m, scar : array_like
        As in :func:`scar_cross_validation`.
    edge_distance_m : array_like, optional
        Distance of each pair from its scar's edge [m].
    thickness_m : array_like or float, optional
        Peat thickness per pair [m]; it also caps the predictions and censors the fit, whatever
        the choice.
    edge, thickness : "cv", float or None
        ``"cv"``: choose among the candidates (or none); a number: that scale [m], always in;
        None: not in the model.
    edge_candidates, thickness_candidates : sequence of float
        Scales to try [m] (:data:`EDGE_TAPER_CANDIDATES_M`, :data:`THICKNESS_TAPER_CANDIDATES_M`).
    min_gain : float
        Smallest relative improvement of the score for a step to be taken.
    **cv_kwargs
        Passed to :func:`scar_cross_validation` (weight, method, water_table_error_m...).

    Returns
    -------
    dict
        ``edge_taper_m``, ``thickness_taper_m`` (0 for none), ``tried`` ((edge, thickness) [m] ->
        score), ``scores`` (label -> score, labels as :attr:`DepthModel.covariates` joined by
        " + ", "none" for the water table alone) and ``cv`` (the cross-validation of the chosen set).

    References
    ----------
    Roberts et al. (2017) (whole groups left out); Hastie, Tibshirani & Friedman (2009), sections
    3.3 and 7.10 (recalled, unchecked).
    """
    cvs: dict = {}

    def score(key, first=False):
        if key not in cvs:
            le, lt = key
            try:
                cvs[key] = scar_cross_validation(
                    water_table_m, depth_m, scar, thickness_m=thickness_m,
                    edge_distance_m=edge_distance_m if le > 0 else None, edge_taper_m=le, thickness_taper_m=lt,
                    **cv_kwargs)
            except GridError:
                if first:
                    raise  # the starting set cannot be cross-validated (too few scars): say so
                cvs[key] = None
        cv = cvs[key]
        return math.nan if cv is None else cv["rel_rmse"]

    free = {}
    if edge == "cv" and edge_distance_m is not None:
        free[0] = tuple(float(c) for c in edge_candidates)
    if thickness == "cv" and thickness_m is not None:
        free[1] = tuple(float(c) for c in thickness_candidates)
    current = [float(edge) if edge not in (None, "cv") else 0.0,
               float(thickness) if thickness not in (None, "cv") else 0.0]
    base = score(tuple(current), first=True)
    while free and math.isfinite(base):
        trials = {}
        for pos, cands in free.items():
            for c in cands:
                key = tuple(c if i == pos else v for i, v in enumerate(current))
                trials[(pos, key)] = score(key)
        ok = {k: v for k, v in trials.items() if math.isfinite(v)}
        if not ok:
            break
        pos, key = min(ok, key=ok.get)
        if not (ok[(pos, key)] <= (1.0 - min_gain) * base
                and _beats_by_one_se(cvs[key], cvs[tuple(current)])):
            break
        current, base = list(key), ok[(pos, key)]
        del free[pos]
    tried = {k: (math.nan if v is None else v["rel_rmse"]) for k, v in cvs.items()}
    scores = {(" + ".join(covariate_labels(*k)) or "none"): v for k, v in tried.items()}
    return {"edge_taper_m": current[0], "thickness_taper_m": current[1], "tried": tried, "scores": scores,
            "cv": cvs[tuple(current)]}


def with_cross_validation(model: DepthModel, cv: Mapping) -> DepthModel:
    """The model with the leave-scar-out statistics of :func:`scar_cross_validation` attached."""
    return replace(model, cv_n_scars=int(cv["n_scars"]), cv_bias=float(cv["bias"]), cv_rmse=float(cv["rmse"]),
                   cv_method=str(cv["method"]))


def extrapolated_share(model: DepthModel, water_table_m, weight=None) -> float:
    """Share of ``weight`` (e.g. modelled area) whose water table lies outside the fitted range.

    Parameters
    ----------
    model : DepthModel
        Its ``water_table_range`` [m]; NaN range (user or default coefficients) gives NaN.
    water_table_m : array_like
        Water table where the model is applied [m].
    weight : array_like, optional
        Per-value weight (area [m2]); default 1.

    Returns
    -------
    float
        Share [0-1]; NaN when nothing is weighted or the range is unknown.
    """
    lo, hi = model.water_table_range
    w = np.asarray(water_table_m, dtype="float64").ravel()
    x = np.ones(w.size) if weight is None else np.broadcast_to(np.asarray(weight, dtype="float64"), w.shape).ravel()
    ok = np.isfinite(w) & np.isfinite(x)
    total = float(x[ok].sum())
    if not (math.isfinite(lo) and math.isfinite(hi)) or not total > 0:
        return math.nan
    out = ok & ((w < lo) | (w > hi))
    return float(x[out].sum() / total)


# ----------------------------------------------------------------------------- interpolation


def _station_arrays(x_obs, y_obs, v_obs):
    x = np.asarray(x_obs, dtype="float64").ravel()
    y = np.asarray(y_obs, dtype="float64").ravel()
    v = np.asarray(v_obs, dtype="float64").ravel()
    if not (x.size == y.size == v.size):
        raise GridError(f"interpolation: {x.size} x, {y.size} y and {v.size} values; give one of each per station")
    ok = np.isfinite(x) & np.isfinite(y) & np.isfinite(v)
    return x[ok], y[ok], v[ok]


def idw(x_obs, y_obs, v_obs, x, y, *, power: float = 2.0, k: int = 12, max_distance=None) -> np.ndarray:
    """Inverse distance weighting of station values onto points (Shepard 1968).

    ``v(p) = sum_i w_i v_i / sum_i w_i``, ``w_i = 1 / d(p, s_i)^power`` over the ``k`` stations
    nearest to ``p`` (found with :class:`scipy.spatial.cKDTree`), within ``max_distance``.

    Parameters
    ----------
    x_obs, y_obs : array_like
        Station positions [m, projected run CRS].
    v_obs : array_like
        Station values (e.g. water-table depth [m]). Stations with a NaN position or value are
        ignored. Several readings at one position are averaged.
    x, y : array_like
        Target positions [m], same shape as each other (e.g. pixel centres of a block).
    power : float
        Distance exponent (2 is the usual choice: common practice).
    k : int
        Nearest stations used per point (at most the number of stations).
    max_distance : float, optional
        Stations farther than this [m] are not used; a point with none within it is NaN.

    Returns
    -------
    numpy.ndarray
        Interpolated values, shape of ``x``; at a station's position exactly its value.

    Notes
    -----
    Limits, to state wherever the result is used:

    * **No uncertainty.** IDW gives no error estimate; use :func:`idw_cross_validation` for a
      leave-one-out error, and treat the interpolated water table as uncertain by at least that.
    * **Bull's-eyes.** Each station pulls the surface towards its own value in a peak or pit
      around it; between stations the surface flattens towards a weighted mean.
    * **No extrapolation.** Values always lie between the smallest and largest station values
      (a convex combination), so a water table deeper than any station's cannot appear, and far
      from stations the surface tends to the mean of the nearest ``k``.
    * **Blind to hydrology.** Distance is straight-line: canals, domes and peat boundaries that
      control the water table are ignored; ordinary kriging has the same blindness but adds a
      variance. With few stations over a large area, prefer a modelled water-table raster.
    * **Time.** Readings must be from near the fire date (see :func:`readings_near_date`).

    References
    ----------
    Shepard, D. (1968). A two-dimensional interpolation function for irregularly-spaced data.
    Proc. 23rd ACM National Conference, 517-524 (recalled, unchecked).
    """
    xs, ys, vs = _station_arrays(x_obs, y_obs, v_obs)
    tx = np.asarray(x, dtype="float64")
    ty = np.asarray(y, dtype="float64")
    if tx.shape != ty.shape:
        raise GridError(f"interpolation: target x has shape {tx.shape} but y has {ty.shape}")
    out = np.full(tx.shape, np.nan)
    if xs.size == 0:
        return out
    # several readings at one position: average them (an exact duplicate would otherwise give 0/0)
    pos, inverse = np.unique(np.column_stack([xs, ys]), axis=0, return_inverse=True)
    inverse = inverse.ravel()
    vs = np.bincount(inverse, weights=vs) / np.bincount(inverse)
    tree = cKDTree(pos)
    kk = int(min(max(int(k), 1), pos.shape[0]))
    flat_x, flat_y = tx.ravel(), ty.ravel()
    finite = np.isfinite(flat_x) & np.isfinite(flat_y)
    q = np.column_stack([flat_x[finite], flat_y[finite]])
    if q.shape[0] == 0:
        return out
    bound = np.inf if max_distance is None else float(max_distance)
    dist, idx = tree.query(q, k=kk, distance_upper_bound=bound)
    dist = dist.reshape(q.shape[0], kk)
    idx = idx.reshape(q.shape[0], kk)
    valid = np.isfinite(dist)  # missing neighbours come back as inf distance and index n
    safe_idx = np.where(valid, idx, 0)
    vals = vs[safe_idx]
    # closer than a nanometre counts as on the station (weights 1/d^p would overflow to inf/inf)
    exact = valid & (dist <= 1e-9)
    with np.errstate(divide="ignore", over="ignore"):
        wts = np.where(valid & ~exact, 1.0 / np.where(valid & ~exact, dist, 1.0) ** power, 0.0)
    sw = wts.sum(axis=1)
    res = np.full(q.shape[0], np.nan)
    has = sw > 0
    res[has] = (wts[has] * vals[has]).sum(axis=1) / sw[has]
    on_station = exact.any(axis=1)
    res[on_station] = vals[on_station, np.argmax(exact[on_station], axis=1)]
    flat_out = out.ravel()
    flat_out[np.flatnonzero(finite)] = res
    return flat_out.reshape(tx.shape)


def idw_cross_validation(x_obs, y_obs, v_obs, *, power: float = 2.0, k: int = 12, max_distance=None) -> dict:
    """Leave-one-out error of :func:`idw` at the stations: each station predicted from the others.

    Parameters
    ----------
    x_obs, y_obs, v_obs, power, k, max_distance
        As in :func:`idw`.

    Returns
    -------
    dict
        ``n`` (stations predicted), ``bias`` (mean predicted - observed), ``rmse``, ``mae``
        [units of the values], and ``predicted`` (array, NaN where a station has no neighbour).
    """
    xs, ys, vs = _station_arrays(x_obs, y_obs, v_obs)
    pred = np.full(xs.size, np.nan)
    for i in range(xs.size):
        others = np.arange(xs.size) != i
        # readings at the same position are left out too: they would make the prediction exact
        others &= ~((xs == xs[i]) & (ys == ys[i]))
        if others.any():
            pred[i] = idw(xs[others], ys[others], vs[others], xs[i], ys[i], power=power, k=k,
                          max_distance=max_distance)
    stats = validate_against_plots(pred, vs)
    stats["predicted"] = pred
    return stats


def readings_near_date(station, day, target_day, *, max_days: float) -> np.ndarray:
    """Pick, for each station, the reading nearest in time to the fire, within ``max_days``.

    Parameters
    ----------
    station : array_like
        Station key per reading (an id, or a position turned into a hashable label).
    day : array_like of float
        Reading time [days on any common scale, e.g. days since 1970-01-01]; NaN means undated.
    target_day : float
        Fire time on the same scale [days].
    max_days : float
        Largest allowed |day - target_day| [days].

    Returns
    -------
    numpy.ndarray of bool
        True for the chosen reading of each station (at most one per station; the earlier reading
        wins a tie). Stations with no reading within ``max_days`` have none chosen.
    """
    s = np.asarray(station, dtype=object).ravel()
    t = np.asarray(day, dtype="float64").ravel()
    if s.size != t.size:
        raise GridError(f"water-table readings: {s.size} station keys but {t.size} dates")
    gap = np.abs(t - float(target_day))
    ok = np.isfinite(gap) & (gap <= float(max_days))
    chosen = np.zeros(s.size, dtype=bool)
    best: dict = {}
    for i in np.flatnonzero(ok):
        key = s[i]
        j = best.get(key)
        if j is None or gap[i] < gap[j] or (gap[i] == gap[j] and t[i] < t[j]):
            best[key] = i
    chosen[list(best.values())] = True
    return chosen


def nearest_dated(day, target_day, *, max_days: float) -> np.ndarray:
    """For each target time, the index of the dated item (e.g. a water-table raster) nearest to it
    within ``max_days``; -1 where none is that near, or where the target is undated (NaN).

    Parameters
    ----------
    day : array_like of float
        Date of each item [days on a common scale, e.g. days since 1970-01-01].
    target_day : array_like of float
        Target times (fire starts) on the same scale [days]; NaN: undated.
    max_days : float
        Largest allowed |day - target_day| [days].

    Returns
    -------
    numpy.ndarray of int
        Index into ``day`` per target; the earlier item wins a tie (as in :func:`readings_near_date`).
    """
    t = np.asarray(day, dtype="float64").ravel()
    x = np.asarray(target_day, dtype="float64").ravel()
    out = np.full(x.size, -1, dtype=np.int64)
    if t.size == 0:
        return out
    order = np.argsort(t, kind="stable")  # earlier first, so argmin takes the earlier of a tie
    gap = np.abs(t[order][None, :] - x[:, None])
    with np.errstate(invalid="ignore"):
        best = np.argmin(np.where(np.isfinite(gap), gap, np.inf), axis=1)
        near = np.isfinite(x) & (gap[np.arange(x.size), best] <= float(max_days))
    out[near] = order[best[near]]
    return out


# ----------------------------------------------------------------------------- validation


def validate_against_plots(predicted, observed) -> dict:
    """Agreement of predicted burn depths with field-plot measurements.

    Parameters
    ----------
    predicted, observed : array_like
        Burn depth predicted by a method at the plots, and measured there [m]. Pairs with a NaN
        are left out.

    Returns
    -------
    dict
        ``n``; ``bias`` = mean(predicted - observed) [m] (positive: the method overestimates);
        ``rmse`` = sqrt(mean((predicted - observed)²)) [m]; ``mae`` = mean |predicted - observed|
        [m]; ``mean_observed``, ``mean_predicted`` [m]. NaN statistics when ``n`` is 0.

    References
    ----------
    Standard definitions (e.g. Willmott 1982, Bull. Am. Meteorol. Soc. 63:1309; recalled, unchecked).
    """
    p = np.asarray(predicted, dtype="float64").ravel()
    o = np.asarray(observed, dtype="float64").ravel()
    if p.size != o.size:
        raise GridError(f"plot validation: {p.size} predictions for {o.size} plots")
    ok = np.isfinite(p) & np.isfinite(o)
    n = int(ok.sum())
    if n == 0:
        return {"n": 0, "bias": math.nan, "rmse": math.nan, "mae": math.nan,
                "mean_observed": math.nan, "mean_predicted": math.nan}
    e = p[ok] - o[ok]
    return {
        "n": n,
        "bias": float(e.mean()),
        "rmse": float(np.sqrt(np.mean(e**2))),
        "mae": float(np.mean(np.abs(e))),
        "mean_observed": float(o[ok].mean()),
        "mean_predicted": float(p[ok].mean()),
    }
