"""Shared pieces of the benchmarks: synthetic inputs, child processes with peak memory, timing.

Invented data only. A scene is an analytic, textured terrain surveyed twice (1 m pixels, UTM
49S): the post-fire survey carries a horizontal georeferencing error, a vertical datum offset,
subsidence, noise and burn depth inside a lattice of rectangular burn scars (about half of the area).
Files are written block by block, so making a large scene needs little memory; scenes are kept
in a cache folder (``$PEATBURN_BENCH_DIR``, default ``/tmp/peatburn-bench``) and reused.
"""

from __future__ import annotations

import json
import os
import platform
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
CACHE = Path(os.environ.get("PEATBURN_BENCH_DIR", "/tmp/peatburn-bench"))
EPSG = 32749
X0, Y0 = 500_000.0, 8_650_000.0  # open Indian Ocean (about 12.2 deg S, 111 deg E): not land
PIXEL = 1.0
BLOCK = 512
#: Burn-scar lattice: one square scar of side FILL * CELL centred in every CELL x CELL m cell.
CELL = 400.0
FILL = 0.7
SHIFT = (0.6, -0.4)  # m, horizontal error of the post survey
OFFSET = 0.3  # m, vertical datum offset of the post survey
NOISE = 0.05  # m, survey noise (sd)
SUBSIDENCE = 0.03  # m/yr
INTERVAL = 2.0  # yr
SIZES = {"4mpx": 2048, "16mpx": 4096, "67mpx": 8192, "268mpx": 16384}  # 268mpx: bench_memory --sizes only


def terrain(x, y):
    """Textured terrain [m] with slopes in all aspects (needed by the co-registration)."""
    return (8.0 + 0.0004 * (x - X0) - 0.0002 * (y - Y0)
            + 0.6 * np.sin((x - X0) / 14.0) * np.cos((y - Y0) / 11.0)
            + 0.4 * np.sin((x - X0 + y - Y0) / 9.0))


def scar_mask(x, y):
    """True inside the scar lattice (pixel centres x, y [m])."""
    margin = CELL * (1 - FILL) / 2
    u = np.mod(x - X0, CELL)
    v = np.mod(Y0 - y, CELL)
    return (u >= margin) & (u < CELL - margin) & (v >= margin) & (v < CELL - margin)


def scar_depth(x, y):
    """True burn depth [m]: 0.2-0.55 m, varying from scar to scar."""
    k = (np.floor((x - X0) / CELL) + 7 * np.floor((Y0 - y) / CELL)) % 8
    return np.where(scar_mask(x, y), 0.2 + 0.05 * k, 0.0)


def scene(name: str, *, zones: int = 0, draws: int = 0) -> Path:
    """Make (or reuse) the scene ``name`` (a key of SIZES); return its config path.

    ``zones`` > 0 adds a zone layer of that many Voronoi polygons tiling the grid; ``draws`` > 0
    asks for that many Monte Carlo draws (``[uncertainty] draws``).
    """
    n = SIZES[name]
    folder = CACHE / f"scene_{name}"
    folder.mkdir(parents=True, exist_ok=True)
    if not (folder / "post.tif").exists():
        t = time.perf_counter()
        _write_surveys(folder, n)
        _write_scars(folder, n)
        print(f"  made {name} survey pair ({n} x {n} px) in {time.perf_counter() - t:.0f} s", file=sys.stderr)
    zone_text = ""
    if zones:
        zpath = folder / f"zones_{zones}.gpkg"
        if not zpath.exists():
            _write_zones(zpath, n, zones)
        zone_text = f'[[zones]]\npath = "{zpath.name}"\nid = "name"\nname = "zones"\n'
    if draws:
        zone_text += f"\n[uncertainty]\ndraws = {draws}\n"
    cfg = folder / ((f"config_z{zones}" if zones else "config") + (f"_d{draws}" if draws else "") + ".toml")
    cfg.write_text(f"""[run]
name = "benchmark {name}"
year = 2030
block_size = {BLOCK}

[burned_area]
path = "scars.gpkg"

[depth.survey]
pre = "pre.tif"
post = "post.tif"
interval_years = {INTERVAL}
subsidence_rate = "{SUBSIDENCE} m/yr"
stable_buffer_m = 10

[peat]
thickness = 4.0
bulk_density = "0.1 g/cm^3"
carbon_fraction = 0.55

[emission_factors]
smouldering = "smouldering_akagi2011"
gwp = "AR6"

{zone_text}""")
    return cfg


def _profile(n):
    from rasterio.crs import CRS
    from rasterio.transform import from_origin

    return dict(driver="GTiff", width=n, height=n, count=1, dtype="float32", crs=CRS.from_epsg(EPSG),
                transform=from_origin(X0, Y0, PIXEL, PIXEL), nodata=-9999.0, tiled=True, blockxsize=BLOCK,
                blockysize=BLOCK, compress="deflate", predictor=3, BIGTIFF="IF_SAFER")


def _write_surveys(folder: Path, n: int):
    import rasterio
    from rasterio.windows import Window

    rng = np.random.default_rng(0)
    prof = _profile(n)
    tmp_pre, tmp_post = folder / "pre.tif.part", folder / "post.tif.part"
    with rasterio.open(tmp_pre, "w", **prof) as dpre, rasterio.open(tmp_post, "w", **prof) as dpost:
        for r in range(0, n, BLOCK):
            for c in range(0, n, BLOCK):
                h, w = min(BLOCK, n - r), min(BLOCK, n - c)
                x = X0 + (c + np.arange(w) + 0.5)[None, :] * PIXEL
                y = Y0 - (r + np.arange(h) + 0.5)[:, None] * PIXEL
                pre = terrain(x, y) + rng.normal(0, NOISE, (h, w))
                xs, ys = x - SHIFT[0], y - SHIFT[1]
                post = (terrain(xs, ys) - scar_depth(xs, ys) - SUBSIDENCE * INTERVAL + OFFSET
                        + rng.normal(0, NOISE, (h, w)))
                win = Window(c, r, w, h)
                dpre.write(pre.astype("float32"), 1, window=win)
                dpost.write(post.astype("float32"), 1, window=win)
    os.replace(tmp_pre, folder / "pre.tif")
    os.replace(tmp_post, folder / "post.tif")


def _write_scars(folder: Path, n: int):
    import geopandas as gpd
    import shapely

    margin = CELL * (1 - FILL) / 2
    boxes = []
    k = int(np.ceil(n * PIXEL / CELL))
    for i in range(k):
        for j in range(k):
            x0 = X0 + j * CELL + margin
            y1 = Y0 - i * CELL - margin
            b = shapely.box(x0, y1 - (CELL - 2 * margin), x0 + CELL - 2 * margin, y1)
            b = b.intersection(shapely.box(X0, Y0 - n * PIXEL, X0 + n * PIXEL, Y0))
            if not b.is_empty and b.area > 0:
                boxes.append(b)
    gpd.GeoDataFrame({"scar": np.arange(len(boxes))}, geometry=boxes, crs=f"EPSG:{EPSG}").to_file(
        folder / "scars.gpkg", layer="scars", driver="GPKG")


def _write_zones(path: Path, n: int, count: int):
    """``count`` non-overlapping Voronoi polygons (about 6 vertices each) tiling the grid."""
    import geopandas as gpd
    import shapely

    side = int(round(np.sqrt(count)))
    rng = np.random.default_rng(1)
    step = n * PIXEL / side
    gx, gy = np.meshgrid(np.arange(side) + 0.5, np.arange(side) + 0.5)
    px = X0 + (gx.ravel() + rng.uniform(-0.35, 0.35, side * side)) * step
    py = Y0 - (gy.ravel() + rng.uniform(-0.35, 0.35, side * side)) * step
    extent = shapely.box(X0, Y0 - n * PIXEL, X0 + n * PIXEL, Y0)
    cells = shapely.get_parts(shapely.voronoi_polygons(shapely.multipoints(np.c_[px, py]), extend_to=extent))
    cells = shapely.intersection(cells, extent)
    cells = cells[~shapely.is_empty(cells)]
    gpd.GeoDataFrame({"name": [f"Z{i:05d}" for i in range(len(cells))]}, geometry=cells,
                     crs=f"EPSG:{EPSG}").to_file(path, layer="zones", driver="GPKG")


# --------------------------------------------------------------------------------------------
# child processes


def _busy_seconds() -> float | None:
    """CPU seconds spent busy by the whole machine since boot (all cores; Linux /proc/stat)."""
    try:
        with open("/proc/stat") as fh:
            f = [int(v) for v in fh.readline().split()[1:]]
    except OSError:
        return None
    user, nice, system, idle, iowait, irq, softirq = f[:7]
    steal = f[7] if len(f) > 7 else 0
    return (user + nice + system + irq + softirq + steal) / os.sysconf("SC_CLK_TCK")


def wait_idle(max_wait: float | None = None, threshold: float = 0.2, sample: float = 2.0) -> float:
    """Wait (up to ``max_wait`` s) until other work on the machine uses less than ``threshold``
    cores over ``sample`` s; return the load seen last [cores]. The benchmarks share the machine.
    ``max_wait`` None: $PEATBURN_BENCH_MAX_WAIT, else 180 s."""
    if max_wait is None:
        max_wait = float(os.environ.get("PEATBURN_BENCH_MAX_WAIT", 180.0))
    t0 = time.perf_counter()
    load = 0.0
    while True:
        a = _busy_seconds()
        if a is None:
            return float("nan")
        time.sleep(sample)
        load = (_busy_seconds() - a) / sample
        if load < threshold or time.perf_counter() - t0 > max_wait:
            return load


def child(task: str, **kwargs) -> dict:
    """Run ``_child.py TASK`` in a fresh interpreter; return its JSON result with the child's
    wall time and peak resident memory (``os.wait4`` rusage of that one child: ru_maxrss, KiB on Linux),
    and ``other_load_cores``: the CPU used meanwhile by other processes of the machine [cores]."""
    busy0 = _busy_seconds()
    t = time.perf_counter()
    proc = subprocess.Popen([sys.executable, str(HERE / "_child.py"), task, json.dumps(kwargs)],
                            stdout=subprocess.PIPE, cwd=str(ROOT))
    out = proc.stdout.read()
    _, status, usage = os.wait4(proc.pid, 0)
    proc.returncode = os.waitstatus_to_exitcode(status)
    wall = time.perf_counter() - t
    if proc.returncode != 0:
        raise RuntimeError(f"benchmark child {task} {kwargs} failed with status {proc.returncode}")
    res = json.loads(out.decode().strip().splitlines()[-1])
    scale = 1024 if sys.platform != "darwin" else 1  # ru_maxrss: KiB on Linux, bytes on macOS
    res["peak_mib"] = usage.ru_maxrss * scale / 2**20
    res["child_wall_s"] = wall
    if busy0 is not None:
        # the child's rusage includes its worker processes (reaped by it)
        other = _busy_seconds() - busy0 - (usage.ru_utime + usage.ru_stime)
        res["other_load_cores"] = max(0.0, other / wall)
    return res


def best_of(repeat: int, task: str, **kwargs) -> dict:
    """Run a child ``repeat`` times; keep the fastest (timings on a shared machine only ever get slower
    by interference), with the largest peak memory seen."""
    runs = []
    for _ in range(max(1, repeat)):
        before = wait_idle()
        r = child(task, **kwargs)
        if kwargs.get("workers", 1) > 1 or kwargs.get("scheduler"):
            # worker processes are children of the multiprocessing fork server, not of the measured
            # child: their CPU cannot be told from other load; report the load just before instead
            r["other_load_cores"] = before
        runs.append(r)
    best = min(runs, key=lambda r: r["wall_s"])
    best = dict(best, peak_mib=max(r["peak_mib"] for r in runs), all_wall_s=[round(r["wall_s"], 1) for r in runs],
                all_other_load=[round(r.get("other_load_cores", float("nan")), 2) for r in runs])
    return best


def best_of_pairs(repeat: int, a: tuple, b: tuple) -> tuple[dict, dict, list[float]]:
    """Run two children alternately ``repeat`` times (a, b, a, b, ...), so that a drift in the
    machine's speed hits both alike; return the fastest of each (as :func:`best_of`) and the
    ratio b / a of every pair."""
    runs_a, runs_b = [], []
    for _ in range(max(1, repeat)):
        runs_a.append(best_of(1, a[0], **a[1]))
        runs_b.append(best_of(1, b[0], **b[1]))

    def merge(runs):
        best = min(runs, key=lambda r: r["wall_s"])
        return dict(best, peak_mib=max(r["peak_mib"] for r in runs),
                    all_wall_s=[r["all_wall_s"][0] for r in runs],
                    all_other_load=[r["all_other_load"][0] for r in runs])

    return merge(runs_a), merge(runs_b), [rb["wall_s"] / ra["wall_s"] for ra, rb in zip(runs_a, runs_b)]


def compare_runs(repeat: int, label0: str, cfg0, label1: str, cfg1, out0: str, out1: str) -> tuple[dict, dict]:
    """Fastest of ``repeat`` whole runs of two configs, run alternately (a drift of the machine's
    speed then hits both alike), with both phase tables and each pair's ratio printed."""
    r0, r1, pairs = best_of_pairs(repeat, ("run", dict(config=str(cfg0), out=out_dir(out0))),
                                  ("run", dict(config=str(cfg1), out=out_dir(out1))))
    print(f"  (fastest of {repeat}, alternating; all runs: {label0} {r0['all_wall_s']}, {label1} {r1['all_wall_s']}; "
          f"each pair's extra time: {', '.join(f'{p - 1:+.0%}' for p in pairs)})")
    print_phases(label0, r0)
    print_phases(label1, r1)
    return r0, r1


def machine() -> dict:
    import rasterio

    cpu = platform.processor() or ""
    try:
        for line in open("/proc/cpuinfo"):
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    mem = ""
    try:
        for line in open("/proc/meminfo"):
            if line.startswith("MemTotal"):
                mem = f"{int(line.split()[1]) / 2**20:.1f} GiB"
    except OSError:
        pass
    return {"cpu": cpu, "cores": os.cpu_count(), "memory": mem, "os": platform.platform(),
            "python": platform.python_version(), "numpy": np.__version__, "rasterio": rasterio.__version__,
            "gdal": rasterio.__gdal_version__}


def print_machine():
    m = machine()
    print(f"machine: {m['cpu']}, {m['cores']} cores, {m['memory']}; {m['os']}; Python {m['python']}, "
          f"numpy {m['numpy']}, rasterio {m['rasterio']}, GDAL {m['gdal']}")


def verdict(value: float, target: float, lower_is_better: bool = True) -> str:
    ok = value <= target if lower_is_better else value >= target
    return "meets" if ok else "MISSES"


def warm(config: Path) -> None:
    """Read the scene's files once so every measured run finds them in the OS page cache."""
    for p in Path(config).parent.iterdir():
        if p.is_file():
            with open(p, "rb") as fh:
                while fh.read(1 << 24):
                    pass


def truth_carbon_t(name: str) -> float:
    """True carbon burned in the scene [t C]: sum of the true depth [m] x 1 m2 x 0.1 t/m3 x 0.55."""
    n = SIZES[name]
    x = X0 + (np.arange(n) + 0.5)[None, :] * PIXEL
    total = 0.0
    for r in range(0, n, 1024):
        y = Y0 - (r + np.arange(min(1024, n - r)) + 0.5)[:, None] * PIXEL
        total += float(scar_depth(x, y).sum())
    return total * PIXEL**2 * 0.1 * 0.55


def load_note(res: dict) -> str:
    """How busy the rest of the machine was during the measurement."""
    loads = res.get("all_other_load") or [res.get("other_load_cores", float("nan"))]
    return "other load " + "/".join(f"{v:.2f}" for v in loads) + " cores"


def print_phases(label: str, res: dict) -> None:
    ph = res.get("phases", {})
    hwm = res.get("hwm_mib", {})
    print(f"  {label}: {res['wall_s']:.1f} s, peak {res['peak_mib']:.0f} MiB ({load_note(res)})")
    for k, v in ph.items():
        mem = f"   (peak so far {hwm[k]:.0f} MiB)" if k in hwm else ""
        print(f"      {k:<40s} {v:6.1f} s{mem}")


def out_dir(label: str) -> str:
    return str(CACHE / "out" / label)
