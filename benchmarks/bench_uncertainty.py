"""Benchmark: zone-level Monte Carlo intervals against the cost of reducing a raster to zone sums.

    python benchmarks/bench_uncertainty.py [--draws 10000] [--zones 10000] [--pixels 4000000] [--terms]

Measured in one run, on one machine, so the ratios are what matter:

* baseline: the zone sums the draws need (area, volume, peat, carbon, rho_area, rho_f_area) from a
  raster of ``--pixels`` pixels with ``numpy.bincount`` (what the pipeline does once per block);
* analytic (no draws): first-order variance components and contributions of every quantity;
* draws: 2.5 / 97.5 percentiles of every quantity (volume, peat, carbon, CO2, CO, CH4, CO2e) for
  every zone and the run total, with survey bias, correlated survey error, subsidence, bulk density,
  carbon fraction and emission factors, on 1 thread and on 2 threads.

The draws never touch pixels: their cost depends on draws x zones only.

``--terms`` (issue 16 items 5-6) adds flaming from FRE (dry matter, carbon, flaming emission factors and
the per-zone FRE integration sum) and times the draws of every quantity without and with the
burned-area term (CV 0.1) and the FRE integration term (cv_1 = 1), one thread: the ratio is the cost of
the two terms.
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from peatburn.science import uncertainty as u


def zone_sums(n_pixels: int, n_zones: int, seed: int = 0) -> tuple[dict[str, np.ndarray], float]:
    """The per-zone sums of a synthetic raster (invented values) by bincount, and the seconds it took."""
    rng = np.random.default_rng(seed)
    side = int(np.sqrt(n_pixels))
    zone = rng.integers(0, n_zones, size=(side, side))
    depth = rng.uniform(0.0, 0.6, size=zone.shape)
    rho = rng.uniform(0.08, 0.14, size=zone.shape)
    f = rng.uniform(0.52, 0.60, size=zone.shape)
    area = np.full(zone.shape, 100.0)
    z = zone.ravel()

    def bc(w):
        return np.bincount(z, weights=w.ravel(), minlength=n_zones)

    t0 = time.perf_counter()
    ra = rho * area * 1000.0
    rfa = ra * f
    sums = {"area_m2_survey": bc(area), "volume_m3": bc(depth * area), "peat_kg": bc(depth * ra),
            "carbon_kg": bc(depth * rfa), "rho_area_survey": bc(ra), "rho_f_area_survey": bc(rfa)}
    return sums, time.perf_counter() - t0


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--draws", type=int, default=10_000)
    ap.add_argument("--zones", type=int, default=10_000)
    ap.add_argument("--pixels", type=int, default=4_000_000)
    ap.add_argument("--terms", action="store_true", help="time the burned-area and FRE integration terms")
    args = ap.parse_args(argv)
    if args.terms:
        return terms(args)

    sums, t_base = zone_sums(args.pixels, args.zones)
    sources = u.default_sources(survey_bias_sd_m=0.02, survey_sigma_m=0.15, survey_range_m=100.0, interval_years=3.0,
                                smouldering_factors={"co2": (1703.0, 38.0), "co": (210.0, 109.0), "ch4": (20.8, 11.4)})
    params = u.sources_to_params(sources, gwp={"co2": 1.0, "ch4": 27.0, "n2o": 273.0})

    t0 = time.perf_counter()
    for q in ("volume_m3", "peat_kg", "carbon_kg", "co2_smouldering_kg", "co_smouldering_kg", "ch4_smouldering_kg",
              "co2e_smouldering_kg"):
        u.variance_components(sums, params, quantity=q, total=True)
        u.contributions(sums, params, quantity=q, total=True)
    t_analytic = time.perf_counter() - t0

    timings = {}
    for workers in (1, 2):
        t0 = time.perf_counter()
        res = u.intervals(sums, params, draws=args.draws, seed=1, total=True, workers=workers)
        timings[workers] = time.perf_counter() - t0
        quantities = list(res)

    print(f"zones {args.zones:,}, draws {args.draws:,}, raster {args.pixels:,} px; quantities: {', '.join(quantities)}")
    print(f"baseline  zone sums by bincount (6 sums)        {t_base:8.3f} s   1.0 x")
    print(f"analytic  variance components + contributions   {t_analytic:8.3f} s   "
          f"{t_analytic / t_base:6.2f} x baseline")
    for w, t in timings.items():
        print(f"draws     intervals, {w} thread{'s' if w > 1 else ' '}                   {t:8.3f} s   "
              f"{t / t_base:6.1f} x baseline")
    per = timings[1] / (args.draws * args.zones * len(quantities)) * 1e9
    print(f"          {per:.1f} ns per draw x zone x quantity (1 thread)")


def terms(args):
    """The draws of every quantity with flaming from FRE, without and with the issue-16 terms (one thread)."""
    sums, _ = zone_sums(args.pixels, args.zones)
    rng = np.random.default_rng(1)
    dm = rng.uniform(1e5, 1e7, args.zones)
    sums.update(flaming_dm_fre_kg=dm, flaming_carbon_kg=0.47 * dm,
                flaming_fre_ssq_kg2=dm * dm / rng.integers(1, 40, args.zones))  # invented: 1-40 looks per zone
    sources = u.default_sources(survey_bias_sd_m=0.02, survey_sigma_m=0.15, survey_range_m=100.0, interval_years=3.0,
                                smouldering_factors={"co2": (1703.0, 38.0), "co": (210.0, 109.0), "ch4": (20.8, 11.4)},
                                flaming_factors={"co2": (1580.0, 90.0), "co": (104.0, 20.0), "ch4": (6.8, 2.0)})
    base = u.sources_to_params(sources, gwp={"co2": 1.0, "ch4": 27.0})
    timings = {}
    for name, extra in (("without", {}), ("with", {"burned_area_cv": 0.1, "fre_integration_cv": 1.0})):
        t0 = time.perf_counter()
        res = u.intervals(sums, {**base, **extra}, draws=args.draws, seed=1, total=True, workers=1)
        timings[name] = time.perf_counter() - t0
    print(f"zones {args.zones:,}, draws {args.draws:,}; quantities: {', '.join(res)}")
    for name, t in timings.items():
        print(f"draws {name:7s} the burned-area and FRE integration terms  {t:8.3f} s")
    print(f"  RATIO with / without: {timings['with'] / timings['without']:.2f}")
    return timings


if __name__ == "__main__":
    main()
