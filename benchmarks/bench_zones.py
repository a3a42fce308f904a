"""Benchmark 4: a run with 10,000 zone polygons against the same run with none.

The zones are Voronoi cells tiling the grid (about 6 vertices each, none overlapping). Target:
<= 25 % extra time for the whole run; the block pass alone is shown too.

    python benchmarks/bench_zones.py [--scene 67mpx] [--zones 10000]
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

import _common as c  # noqa: E402

BLOCK_PHASES = ("blocks (compute, or wait for workers)",)


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--scene", default="67mpx", choices=sorted(c.SIZES))
    ap.add_argument("--zones", type=int, default=10_000)
    ap.add_argument("--repeat", type=int, default=3, help="runs of each, alternating; the fastest is kept")
    a = ap.parse_args(argv)
    print(f"[4] {a.zones} zone polygons vs none, {a.scene}")
    cfg0 = c.scene(a.scene)
    cfgz = c.scene(a.scene, zones=a.zones)
    c.warm(cfg0)
    r0, rz = c.compare_runs(a.repeat, "no zones", cfg0, f"{a.zones} zones", cfgz, "z0", "zN")
    extra = rz["wall_s"] / r0["wall_s"] - 1
    b0 = sum(r0["phases"][k] for k in BLOCK_PHASES)
    bz = sum(rz["phases"][k] for k in BLOCK_PHASES)
    print(f"  RATIO extra time with zones: whole run {extra:+.0%} (<= 25 %: {c.verdict(extra, 0.25)}); "
          f"block pass {bz / b0 - 1:+.0%}")
    return {"run_0_s": r0["wall_s"], "run_z_s": rz["wall_s"], "extra": extra, "block_extra": bz / b0 - 1,
            "phases_z": rz["phases"]}


if __name__ == "__main__":
    c.print_machine()
    main()
