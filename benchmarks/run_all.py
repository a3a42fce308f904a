"""Run every benchmark of the scale work and print the ratios (``make bench``).

    python benchmarks/run_all.py [--only io,memory,workers,zones,draws,writes,detections]

Synthetic scenes are made on first use in $PEATBURN_BENCH_DIR (default /tmp/peatburn-bench,
about 0.5 GB for the 67 Mpx pair) and reused. Takes about 6.5 minutes on 2 cores (each
benchmark under 2). Timings keep the fastest of 2 or 3 runs and wait for the machine to be idle.
The results are also written to $PEATBURN_BENCH_DIR/results.json. The five benchmarks of the
scale issue are io (1), memory (2), workers (3), zones (4) and draws (5); writes times the main
process's share of a parallel run; detections (7) groups a million dense active-fire detections;
depth_model times the water-table model's fit and its
leave-scar-out cross-validation at 30,000 scars (about half a minute); national (issue 19) runs a
400 Mpx water-table scene against one decode of its raster (a few minutes, 1 GB of scene).
"""

from __future__ import annotations

import argparse
import importlib
import json
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

import _common as c  # noqa: E402

BENCHES = {"io": "bench_io", "memory": "bench_memory", "workers": "bench_workers", "zones": "bench_zones",
           "draws": "bench_draws", "writes": "bench_writes", "detections": "bench_detections",
           "depth_model": "bench_depth_model", "national": "bench_national"}


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--only", default=",".join(BENCHES))
    a = ap.parse_args(argv)
    c.print_machine()
    results = {"machine": c.machine()}
    t0 = time.perf_counter()
    for key in a.only.split(","):
        name = BENCHES[key.strip()]
        if not (Path(__file__).resolve().parent / f"{name}.py").exists():
            print(f"[{key}] {name}.py not present: skipped")
            continue
        t = time.perf_counter()
        mod = importlib.import_module(name)
        results[key] = mod.main([])
        print(f"  ({key}: {time.perf_counter() - t:.0f} s)\n", flush=True)
    c.CACHE.mkdir(parents=True, exist_ok=True)
    (c.CACHE / "results.json").write_text(json.dumps(results, indent=2, default=str))
    print(f"all benchmarks: {time.perf_counter() - t0:.0f} s; results in {c.CACHE / 'results.json'}")


if __name__ == "__main__":
    main()
