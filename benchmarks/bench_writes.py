"""The main process's capacity in a parallel run: how many blocks a second it can take in.

With ``--workers N`` or ``--scheduler``, the main process unpickles every block result, adds its
sums and writes its three output rasters. That work does not spread over the workers, so it caps
the number of workers that pay. This prints it per block, with the three rasters written one
after another and through the run's writing threads (``peatburn.io.writers.BlockWrites``),
and the number of workers each can feed (a worker's time per block / the main process's).
No target in the issue; a ratio measured in one run.

    python benchmarks/bench_writes.py [--scene 67mpx]
"""

from __future__ import annotations

import argparse
import statistics
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

import _common as c  # noqa: E402


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--scene", default="67mpx", choices=sorted(c.SIZES))
    ap.add_argument("--repeat", type=int, default=5, help="alternating passes of each way; the median is kept")
    ap.add_argument("--worker-block-ms", type=float, default=None,
                    help="a worker's time per block [ms] (default: the serial block pass's, as measured here)")
    a = ap.parse_args(argv)
    print(f"[writes] main process per block, {a.scene}")
    cfg = c.scene(a.scene)
    c.warm(cfg)
    r = c.child("main_writes", config=str(cfg), out=c.out_dir("main_writes"), repeat=a.repeat)
    n = r["blocks"]
    seq = statistics.median(r["one_after_another_s"]) / n * 1e3
    thr = statistics.median(r["threads_s"]) / n * 1e3
    worker_ms = a.worker_block_ms or r["serial_read_ahead_block_s"] * 1e3
    print(f"  unpickle + sums + 3 raster writes: {seq:.1f} ms per block one raster after another, "
          f"{thr:.1f} ms through the writing threads (all passes: {[round(x, 2) for x in r['one_after_another_s']]} s, "
          f"{[round(x, 2) for x in r['threads_s']]} s; {c.load_note(r)})")
    print(f"  a block takes a worker about {worker_ms:.0f} ms (serial pass with read-ahead): the main process "
          f"feeds about {worker_ms / seq:.1f} workers one raster after another, {worker_ms / thr:.1f} with the threads")
    print(f"  RATIO main-process capacity, threads / one after another = {seq / thr:.2f}")
    return {"one_after_another_ms": seq, "threads_ms": thr, "ratio": seq / thr, "worker_block_ms": worker_ms}


if __name__ == "__main__":
    c.print_machine()
    main()
