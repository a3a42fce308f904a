"""Benchmark 1: a survey-only run of a ~67 Mpx survey pair against its I/O floor.

The floor is the least a run must do with the disk: read both surveys by blocks, write two
float32 rasters block by block (NaN outside the scars, like a run's outputs) and copy them to
COG with the run's own writer. Target: run / floor <= 1.5 (aim 1.2).

    python benchmarks/bench_io.py [--scene 67mpx]
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

import _common as c  # noqa: E402


def _fmt(r):
    return "/".join(f"{t:.1f}" for t in r["all_wall_s"]) + " s"


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--scene", default="67mpx", choices=sorted(c.SIZES))
    ap.add_argument("--repeat", type=int, default=3, help="pairs of runs (floor, run); the fastest of each is kept")
    a = ap.parse_args(argv)
    print(f"[1] survey-only run vs I/O floor, {a.scene}")
    cfg = c.scene(a.scene)
    c.warm(cfg)
    # the floor runs under the GDAL settings a run uses (peatburn.engine.runner.run wraps itself in gdal_env)
    floor, run, pairs = c.best_of_pairs(a.repeat, ("floor", dict(config=str(cfg), out=c.out_dir("floor"), gdal_env=True)),
                                        ("run", dict(config=str(cfg), out=c.out_dir("run"))))
    truth = c.truth_carbon_t(a.scene)
    print(f"  (fastest of {a.repeat} runs each, alternating; all runs: floor {_fmt(floor)}, run {_fmt(run)})")
    print(f"  I/O floor: {floor['wall_s']:.1f} s, peak {floor['peak_mib']:.0f} MiB ({c.load_note(floor)})")
    c.print_phases("survey-only run", run)
    ratio = run["wall_s"] / floor["wall_s"]
    print(f"  run / floor of each pair run back to back: {', '.join(f'{p:.2f}' for p in pairs)} "
          f"(median {sorted(pairs)[len(pairs) // 2]:.2f})")
    print(f"  sanity: estimated carbon / true carbon = {run['carbon_t'] / truth:.4f}")
    print(f"  RATIO run / floor = {ratio:.2f}; target <= 1.5: {c.verdict(ratio, 1.5)}; "
          f"aim 1.2: {c.verdict(ratio, 1.2)}")
    return {"scene": a.scene, "floor_s": floor["wall_s"], "run_s": run["wall_s"], "ratio": ratio, "pair_ratios": pairs,
            "run_phases": run["phases"], "floor_peak_mib": floor["peak_mib"],
            "carbon_over_truth": run["carbon_t"] / truth}


if __name__ == "__main__":
    c.print_machine()
    main()
