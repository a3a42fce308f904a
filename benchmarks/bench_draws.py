"""Benchmark 5: a run with 10,000 Monte Carlo draws against the same run with none.

Both runs have 10,000 zone polygons (the intervals are drawn per zone, so zones are what the
draws cost); without draws a run still gives the analytic variance contributions. Target:
<= 25 % extra time for the whole run.

    python benchmarks/bench_draws.py [--scene 67mpx] [--zones 10000] [--draws 10000]
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

import _common as c  # noqa: E402


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--scene", default="67mpx", choices=sorted(c.SIZES))
    ap.add_argument("--zones", type=int, default=10_000)
    ap.add_argument("--draws", type=int, default=10_000)
    ap.add_argument("--repeat", type=int, default=3, help="runs of each, alternating; the fastest is kept")
    a = ap.parse_args(argv)
    print(f"[5] {a.draws} Monte Carlo draws vs none, {a.scene} with {a.zones} zones")
    cfg0 = c.scene(a.scene, zones=a.zones)
    cfgd = c.scene(a.scene, zones=a.zones, draws=a.draws)
    c.warm(cfg0)
    r0, rd = c.compare_runs(a.repeat, "no draws", cfg0, f"{a.draws} draws", cfgd, "d0", "dN")
    extra = rd["wall_s"] / r0["wall_s"] - 1
    print(f"  RATIO extra time with {a.draws} draws: whole run {extra:+.0%} (<= 25 %: {c.verdict(extra, 0.25)})")
    return {"run_0_s": r0["wall_s"], "run_draws_s": rd["wall_s"], "extra": extra, "phases_draws": rd["phases"]}


if __name__ == "__main__":
    c.print_machine()
    main()
