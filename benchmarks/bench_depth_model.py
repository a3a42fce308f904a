"""Benchmark 8: the water-table depth model's fit and leave-scar-out cross-validation at national scale.

A synthetic season of tens of thousands of surveyed scars (edge-tapered, right-skewed depths, a few
canal-edge artefacts), sampled as a run samples them (at most 200,000 pixel pairs). Times, in one
run: the fit with its cluster bootstrap over scars (200 replicates, as a run does), the fit alone,
and the 10-fold leave-scar-out cross-validation, for Theil-Sen and Huber screens; and the forward
selection of both covariates (edge taper and thin-peat factor, ``select_covariates``) with the
Theil-Sen screen. Printed figures only; no target is asserted.

    python benchmarks/bench_depth_model.py [--scars 30000] [--pairs 200000]
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from peatburn.science import water_table as wt


def season(n_scars: int, n_pairs: int, seed: int = 0):
    """(water table, depth, scar) pairs: per scar a water table, a random effect, edge-tapered skewed
    pixels [m, m, -]; invented for this benchmark."""
    rng = np.random.default_rng(seed)
    size = rng.integers(3, 3 * max(1, n_pairs // n_scars), n_scars)
    scar = np.repeat(np.arange(n_scars), size)
    scar = scar[np.sort(rng.choice(scar.size, min(n_pairs, scar.size), replace=False))]
    n = scar.size
    w = rng.uniform(0.2, 1.4, n_scars)[scar] + rng.normal(0, 0.05, n)
    edge = rng.uniform(0, 60, n)  # distance to the scar edge [m]
    effect = np.exp(rng.normal(0, 0.15, n_scars))[scar]
    d = (0.05 + 0.5 * w) * (1 - np.exp(-edge / 25)) * effect * rng.gamma(2.0, 0.5, n)
    bad = rng.random(n) < 0.01
    d[bad] += rng.uniform(2, 4, int(bad.sum()))  # canal edges, spoil banks
    return w, d, scar, edge, rng.uniform(0.3, 4.0, n_scars)[scar]


def _time(fn):
    t = time.perf_counter()
    out = fn()
    return out, time.perf_counter() - t


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--scars", type=int, default=30_000)
    ap.add_argument("--pairs", type=int, default=200_000)
    a = ap.parse_args(argv)
    w, d, scar, edge, thick = season(a.scars, a.pairs)
    k = np.unique(scar).size
    print(f"[8] water-table depth model: {w.size} pairs from {k} scars")
    out = {}
    for method in wt.METHODS:
        _, t_fit = _time(lambda: wt.fit_depth_model(w, d, method=method, n_boot=0))
        m, t_boot = _time(lambda: wt.fit_depth_model(w, d, method=method, n_boot=200, cluster=scar))
        cv, t_cv = _time(lambda: wt.scar_cross_validation(w, d, scar, method=method))
        print(f"  {method:9s} fit {t_fit:6.2f} s | fit + cluster bootstrap (200) {t_boot:6.2f} s | "
              f"10-fold leave-scar-out CV {t_cv:6.2f} s (RATIO CV / fit {t_cv / t_fit:.1f}) | "
              f"slope {m.slope:.3f} +- {m.slope_se:.3f}, screened {m.n_screened}, "
              f"CV bias {cv['bias']:+.1%}, RMSE {cv['rmse']:.1%} of a scar's depth sum")
        out[method] = {"fit_s": t_fit, "fit_boot_s": t_boot, "cv_s": t_cv}
    sel, t_sel = _time(lambda: wt.select_covariates(w, d, scar, edge_distance_m=edge, thickness_m=thick, edge="cv",
                                                    thickness="cv"))
    print(f"  covariate selection (edge taper and thin-peat factor, forward, {len(sel['tried'])} cross-validations) "
          f"{t_sel:6.2f} s (RATIO selection / CV {t_sel / out['theil-sen']['cv_s']:.1f}); chosen: "
          f"{' + '.join(wt.covariate_labels(sel['edge_taper_m'], sel['thickness_taper_m'])) or 'none'}")
    out["selection_s"] = t_sel
    return out


if __name__ == "__main__":
    main()
