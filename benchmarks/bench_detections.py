"""Benchmark 7: a million active-fire detections packed over the demo's fires.

The demo region's detections (a few dozen over about 7 km2 of burn scars) are multiplied into
dense clouds: each new detection is an original one moved by up to 600 m in x and y and up to
36 h in time (rounded to the minute), with a random FRP. Two measurements, each in a fresh
interpreter (peak resident memory of that process alone):

1. the grouping into events and the FRE alone (``flaming.assign_events`` + ``detection_energy``);
2. the whole demo run with that detection file (reading, reprojection, events, FRE, zones).

Target: well under 1 GiB and seconds for the grouping (the former pair search needed 2.6 GiB for
100,000 such detections and was killed at 23 GiB for 1,000,000).

    python benchmarks/bench_detections.py [--n 1000000] [--no-run]
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402

import _common as c  # noqa: E402


def dense_region(n: int) -> Path:
    """The demo region with ``n`` dense detections in place of its own (made once, cached)."""
    folder = c.CACHE / f"demo_dense_{n}"
    config = folder / "config.toml"
    if config.exists():
        return config
    from peatburn.demo import make_demo_region

    make_demo_region(folder)
    seed = pd.read_csv(folder / "detections.csv")
    rng = np.random.default_rng(7)
    k = rng.integers(0, len(seed), n)
    t0 = pd.to_datetime(seed["time"], utc=True).dt.tz_localize(None).to_numpy()[k]
    minutes = np.round(rng.uniform(-36 * 60, 36 * 60, n)).astype("int64")
    dense = pd.DataFrame({
        "x": np.round(seed["x"].to_numpy()[k] + rng.uniform(-600, 600, n), 1),
        "y": np.round(seed["y"].to_numpy()[k] + rng.uniform(-600, 600, n), 1),
        "time": pd.DatetimeIndex(t0 + minutes.astype("timedelta64[m]")).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "frp_mw": np.round(np.clip(rng.lognormal(np.log(12.0), 0.8, n), 2.0, 300.0), 1),
    }).sort_values("time", kind="stable")
    dense.to_csv(folder / "detections.csv", index=False)
    return config


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=1_000_000)
    ap.add_argument("--no-run", action="store_true", help="measure the grouping only, not the whole run")
    a = ap.parse_args(argv)
    print(f"[7] {a.n:,} dense active-fire detections over the demo's fires")
    config = dense_region(a.n)
    ev = c.child("events", path=str(config.parent / "detections.csv"))
    print(f"  grouping + FRE: {ev['wall_s']:.2f} s (grouping {ev['grouping_s']:.2f} s), {ev['events']} events; "
          f"peak {ev['peak_mib']:.0f} MiB for the process, {ev['read_mib']:.0f} MiB of it reached before the "
          f"grouping (imports, CSV read by pandas) (< 1024 MiB: {c.verdict(ev['peak_mib'], 1024)})")
    out = {"n": a.n, "events_s": ev["wall_s"], "grouping_s": ev["grouping_s"], "events_peak_mib": ev["peak_mib"],
           "events": ev["events"]}
    if not a.no_run:
        run = c.child("run", config=str(config), out=c.out_dir("dense_detections"))
        c.print_phases("whole demo run", run)
        out.update(run_s=run["wall_s"], run_peak_mib=run["peak_mib"], run_phases=run["phases"])
    return out


if __name__ == "__main__":
    main()
