"""Benchmark 3: two local worker processes against one on the CPU-bound part.

The CPU-bound part is the block pass alone (map_blocks(process_block) over every window, results
summed, nothing written), timed after the plan is built and with the GDAL block cache emptied
(so the serial pass does not reuse tiles the co-registration decoded; the workers cannot). The
worker processes are started before the co-registration, as a run starts them; the pass with
their start-up inside it is shown too. Aim: >= 1.6x with 2 workers. Whole runs with --workers 1
and 2 are shown beside it (co-registration and COG conversion stay serial).

    python benchmarks/bench_workers.py [--scene 67mpx]
"""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

import _common as c  # noqa: E402


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--scene", default="67mpx", choices=sorted(c.SIZES))
    ap.add_argument("--repeat", type=int, default=2, help="runs of each block pass; the fastest is kept")
    a = ap.parse_args(argv)
    print(f"[3] workers, {a.scene} ({os.cpu_count()} cores)")
    cfg = c.scene(a.scene)
    c.warm(cfg)
    b1 = c.best_of(a.repeat, "blocks", config=str(cfg), workers=1)
    b2 = c.best_of(a.repeat, "blocks", config=str(cfg), workers=2)
    b2c = c.best_of(a.repeat, "blocks", config=str(cfg), workers=2, early=False)
    assert b1["carbon_kg"] == b2["carbon_kg"] == b2c["carbon_kg"]  # same blocks added in the same order
    r1 = c.best_of(1, "run", config=str(cfg), out=c.out_dir("w1"), workers=1)
    r2 = c.best_of(1, "run", config=str(cfg), out=c.out_dir("w2"), workers=2)
    speed = b1["wall_s"] / b2["wall_s"]
    print(f"  block pass ({b1['blocks']} blocks, GDAL cache emptied first): serial {b1['wall_s']:.1f} s, "
          f"2 workers {b2['wall_s']:.1f} s (all runs {b1['all_wall_s']}, {b2['all_wall_s']}; "
          f"{c.load_note(b1)}, {c.load_note(b2)})")
    print(f"  with the workers' start-up inside the pass (not overlapping the co-registration): "
          f"{b2c['wall_s']:.1f} s, ratio {b1['wall_s'] / b2c['wall_s']:.2f}")
    c.print_phases("whole run, --workers 1", r1)
    c.print_phases("whole run, --workers 2", r2)
    print(f"  RATIO block pass 1 / 2 workers = {speed:.2f} (aim >= 1.6: {c.verdict(speed, 1.6, False)}); "
          f"whole run {r1['wall_s'] / r2['wall_s']:.2f}")
    return {"blocks_1_s": b1["wall_s"], "blocks_2_s": b2["wall_s"], "blocks_2_cold_s": b2c["wall_s"], "speedup": speed,
            "run_1_s": r1["wall_s"], "run_2_s": r2["wall_s"]}


if __name__ == "__main__":
    c.print_machine()
    main()
