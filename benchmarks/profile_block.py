"""Where the time of a run goes: cProfile of the co-registration and of process_block.

    python benchmarks/profile_block.py [--scene 16mpx] [--blocks 32] [--zones 0]

Prints the functions with the most internal time (``tottime``) for co-registration (run once)
and for ``process_block`` over the first ``--blocks`` windows that hold burned pixels.
"""

from __future__ import annotations

import argparse
import cProfile
import io
import pstats
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

import _common  # noqa: E402


def _top(prof, n=14, sort="tottime"):
    s = io.StringIO()
    pstats.Stats(prof, stream=s).strip_dirs().sort_stats(sort).print_stats(n)
    lines = s.getvalue().splitlines()
    start = next(i for i, line in enumerate(lines) if "ncalls" in line)
    return "\n".join(lines[start:start + n + 1])


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--scene", default="16mpx", choices=sorted(_common.SIZES))
    ap.add_argument("--blocks", type=int, default=32)
    ap.add_argument("--zones", type=int, default=0)
    a = ap.parse_args(argv)
    import peatburn
    from peatburn.engine.alignment import coregister
    from peatburn.engine.blocks import process_block
    from peatburn.engine.inputs import open_inputs
    from peatburn.engine.plan import build_plan

    cfg = peatburn.load_config(_common.scene(a.scene, zones=a.zones))
    inputs = open_inputs(cfg)
    prof = cProfile.Profile()
    t = time.perf_counter()
    prof.enable()
    alignment = coregister(inputs)
    prof.disable()
    print(f"co-registration: {time.perf_counter() - t:.2f} s (under the profiler)")
    print(_top(prof))
    plan = build_plan(inputs, alignment)
    windows = plan.grid.windows(cfg.block_size)[: a.blocks]
    process_block(plan, windows[0])  # open the readers outside the profile
    prof = cProfile.Profile()
    t = time.perf_counter()
    prof.enable()
    for w in windows:
        process_block(plan, w)
    prof.disable()
    dt = time.perf_counter() - t
    px = sum(int(w.width * w.height) for w in windows)
    print(f"\nprocess_block: {len(windows)} blocks, {dt:.2f} s under the profiler, {dt / px * 1e9:.0f} ns per pixel")
    print(_top(prof))


if __name__ == "__main__":
    main()
