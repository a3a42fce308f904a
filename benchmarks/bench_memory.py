"""Benchmark 2: peak memory of a run at 4 Mpx and 67 Mpx (and 16 Mpx between).

Each run is a fresh child process; its peak resident memory is the ru_maxrss that os.wait4
returns for that child. Targets: <= 1 GiB at 67 Mpx, growing less than 30 % from 4 Mpx.
Also measured: the raster writer alone (67 Mpx float32 written by blocks and copied to COG).

    python benchmarks/bench_memory.py
"""

from __future__ import annotations

import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

import _common as c  # noqa: E402


def main(argv=None) -> dict:
    print("[2] peak memory")
    res = {}
    for name in ("4mpx", "16mpx", "67mpx"):
        cfg = c.scene(name)
        c.warm(cfg)
        for env in (False, True):
            r = c.best_of(1, "run", config=str(cfg), out=c.out_dir("mem"), gdal_env=env)
            res[(name, env)] = r
            hw = ", ".join(f"{k.split(' (')[0]} {v:.0f}" for k, v in r["hwm_mib"].items()
                           if k in ("open inputs", "co-registration", "block writes", "COG conversion"))
            print(f"  {name:>6s} {'gdal_env' if env else 'defaults':>9s}: peak {r['peak_mib']:5.0f} MiB, "
                  f"{r['wall_s']:5.1f} s   [peak after: {hw}]  ({c.load_note(r)})")
    out = {}
    for env, label in ((False, "GDAL defaults"), (True, "gdal_env (256 MiB cache)")):
        small, big = res[("4mpx", env)]["peak_mib"], res[("67mpx", env)]["peak_mib"]
        growth = big / small - 1
        print(f"  {label}: 67 Mpx {big:.0f} MiB (<= 1024: {c.verdict(big, 1024)}), "
              f"growth from 4 Mpx {growth:+.0%} (< 30 %: {c.verdict(growth, 0.30)})")
        out[label] = {"4mpx_mib": small, "16mpx_mib": res[("16mpx", env)]["peak_mib"], "67mpx_mib": big,
                      "growth": growth}
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
