"""Benchmark 2: peak memory of a run at 4 Mpx and 67 Mpx (and 16 Mpx between).

Each run is a fresh child process; its peak resident memory is the ru_maxrss that os.wait4
returns for that child. Targets: <= 1 GiB at 67 Mpx, growing less than 30 % from 4 Mpx.
Also measured: the raster writer alone (67 Mpx float32 written by blocks and copied to COG).

    python benchmarks/bench_memory.py
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

import _common as c  # noqa: E402


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="4mpx,16mpx,67mpx",
                    help="scenes to measure (4mpx and 67mpx are needed for the ratio; 268mpx adds a 1 GB pair)")
    ap.add_argument("--no-writer", action="store_true", help="skip the writer-alone measurement")
    a = ap.parse_args(argv)
    sizes = a.sizes.split(",")
    print("[2] peak memory")
    res = {}
    for name in sizes:
        cfg = c.scene(name)
        c.warm(cfg)
        r = c.best_of(1, "run", config=str(cfg), out=c.out_dir("mem"))
        res[name] = r
        hw = ", ".join(f"{k.split(' (')[0]} {v:.0f}" for k, v in r["hwm_mib"].items()
                       if k.split(" (")[0] in ("open inputs", "co-registration", "block writes", "COG conversion"))
        print(f"  {name:>6s}: peak {r['peak_mib']:5.0f} MiB, {r['wall_s']:5.1f} s   [peak after: {hw}]  "
              f"({c.load_note(r)})")
    out = {name: r["peak_mib"] for name, r in res.items()}
    if {"4mpx", "67mpx"} <= set(sizes):
        small, big = res["4mpx"]["peak_mib"], res["67mpx"]["peak_mib"]
        growth = big / small - 1
        print(f"  RATIO 67 Mpx {big:.0f} MiB (<= 1024: {c.verdict(big, 1024)}), growth from 4 Mpx {growth:+.0%} "
              f"(< 30 %: {c.verdict(growth, 0.30)})")
        out["growth"] = growth
    if a.no_writer:
        return out
    n = c.SIZES["67mpx"]
    for env, label in ((False, "GDAL defaults"), (True, "gdal_env")):
        w = c.best_of(1, "write", n=n, out=str(c.CACHE / "out" / "write.tif"), gdal_env=env)
        print(f"  writer alone, {n} x {n} float32 ({n * n * 4 / 2**20:.0f} MiB of data), {label}: "
              f"peak {w['peak_mib']:.0f} MiB, {w['wall_s']:.1f} s")
        out[f"writer {label}"] = w["peak_mib"]
    return out


if __name__ == "__main__":
    c.print_machine()
    main()
