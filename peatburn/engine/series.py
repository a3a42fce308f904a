"""A series of yearly runs with one method: ``peatburn series SERIES.toml --out DIR``.

The years run in order, each into ``DIR/<year>/`` with the outputs of a run (each year's figures
are its run's). With ``series.fire_history`` (the default) every year after the first gets the
burn-depth rasters of the earlier years (``RunConfig.earlier_burns``): its depth is capped by the
peat left and its repeat-fire status comes from the series where the scars do not carry a fire
count (docs/method.md, "Fire history across years"). Then the years' totals are drawn jointly
(common random numbers for the sources the years share, :data:`peatburn.series_config.SHARED_SOURCES`)
for the intervals of the multi-year sum and of the trend (peatburn.science.trend), and the series
tables and report are written: ``inventory.csv`` / ``inventory.json`` (every year; one line per
calendar year x phase x gas where two runs reach one calendar year, refused when that counts a fire
twice), ``series.csv``, ``series.json``, ``series_report.html`` (and ``recalculation.csv`` with
``against``). Everything is written into a staging folder under the folder's lock, sealed with a
``SHA256SUMS`` over every file below it and swapped in whole (peatburn.io.result_set), as a run's
folder is; ``peatburn check --outputs DIR`` verifies it (peatburn.outputs.checksums).
"""

from __future__ import annotations

import dataclasses
import json
import math
import zlib
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import ConfigError, MissingInputError
from ..io.writers import write_csv, write_json
from ..outputs import series_tables as st
from ..outputs.tables import run_gases, units
from ..science import trend
from ..series_config import SeriesConfig
from .intervals import _column
from .runner import CAUTIONS, RunResult, load_factors, run


@dataclass
class SeriesResult:
    """What a series produced."""

    out_dir: Path
    years: list[int]
    results: list[RunResult]
    rows: list[dict]
    summary: dict
    files: dict = field(default_factory=dict)
    recalculation: list | None = None


def tier1_fuel_of(cfg) -> float:
    """The Tier 1 fuel consumption a year's run uses [t/ha] (its setting, else the default: engine.plan)."""
    from .plan import tier1_default_fuel

    return float(cfg.tier1.fuel_consumption_t_ha or tier1_default_fuel())


def with_history(cfg, earlier: list[RunResult], recorded_dir=None, earlier_configs=()):
    """``cfg`` with the burn-depth and depth-method rasters of the earlier years of the series and the
    Tier 1 fuel consumption each used (from ``earlier_configs``, their configurations). ``recorded_dir`` (the series folder once swapped in): where
    provenance.json records them, when the runs read them from the series' staging folder."""
    burns = tuple((Path(r.files["burn_depth"]), Path(r.files["depth_method"])) for r in earlier)
    shown = ()
    if recorded_dir is not None:
        shown = tuple((f"series.earlier_burns[{i}].{kind}", str(Path(recorded_dir) / Path(r.out_dir).name / p.name))
                      for i, (r, pair) in enumerate(zip(earlier, burns)) for kind, p in zip(("depth", "method"), pair))
    fuel = tuple(tier1_fuel_of(c) for c in earlier_configs)
    return dataclasses.replace(cfg, earlier_burns=burns, earlier_tier1_fuel_t_ha=fuel, recorded_as=shown)


def year_seed(seed: int, year: int, base: bool) -> int:
    """Seed of a year's own sources in the joint draws: the run's seed for the base year (so its
    draws are those of its own run), else one derived from the seed and the year (CRC-32 of
    ``"seed:year"``), so the years' own errors are independent."""
    return int(seed) if base else zlib.crc32(f"{int(seed)}:{int(year)}".encode()) & 0x7FFFFFFF


def joint_draws(series: SeriesConfig, results: list[RunResult]) -> dict | None:
    """Joint draws of every year's totals: ``{"draws": n, "quantities": {q: array (years, n)}}`` in
    kg (quantities of peatburn.science.uncertainty), or None when the runs made no draws.

    The sources of ``series.shared_sources`` use the base year's seed in every year (common random
    numbers: draw k of every year has the same emission-factor, density... multipliers); the
    others use :func:`year_seed`.
    """
    from ..science import uncertainty as unc

    if any(r.draw_inputs is None for r in results):
        return None
    base_i = series.years.index(series.base_year)
    shared_seed = series.runs[base_i].config.uncertainty.seed
    draws = series.runs[base_i].config.uncertainty.draws
    out = {}
    for i, (entry, r) in enumerate(zip(series.runs, results)):
        seed = year_seed(entry.config.uncertainty.seed if i == base_i else shared_seed, entry.year, i == base_i)
        d = unc.draw_zone_totals(r.draw_inputs["sums"], r.draw_inputs["params"], draws=draws, seed=seed,
                                 group_seeds={g: shared_seed for g in series.shared_sources})
        for q, a in d.items():
            out.setdefault(q, [np.zeros(draws)] * len(results))[i] = a[:, 0]
    # a quantity one year lacks (no flaming in that year): zeros, as its table has zeros
    return {"draws": draws, "quantities": {q: np.stack(v) for q, v in out.items()}}


def _with_total_co2e(q: dict) -> dict:
    if "co2e_smouldering_kg" in q and "co2e_flaming_kg" in q:
        q = {**q, "co2e_kg": q["co2e_smouldering_kg"] + q["co2e_flaming_kg"]}
    return q


def joint_summary(series: SeriesConfig, results: list[RunResult], gases, joint=False) -> dict:
    """The multi-year sum and the trend (last year vs base year) of each quantity with an interval,
    from the joint draws and from the same draws made independent between years (for comparison),
    and the correlation of the years' below-ground carbon. ``joint``: the :func:`joint_draws`
    already made (drawn here when not given)."""
    years = series.years
    base_i, last_i = years.index(series.base_year), len(years) - 1
    span = f"{years[0]}-{years[-1]}"
    summary = {"span": span, "trend_years": f"{series.base_year}-{years[-1]}", "base_year": series.base_year,
               "last_year": years[-1], "shared_sources": list(series.shared_sources), "quantities": []}
    joint = joint_draws(series, results) if joint is False else joint
    unit_of = units(gases)
    totals = [r.total for r in results]
    cols = ["peat_burned_t", "carbon_smouldering_t", "carbon_flaming_t", "co2e_smouldering_t", "co2e_flaming_t",
            "co2e_t"] + [f"{g}_{p}_t" for p in ("smouldering", "flaming") for g in ("co2", "ch4", "co")]
    values = {c: np.array([_total(t, c) for t in totals]) for c in cols}
    flaming_all = all(st.flaming_estimated(r.totals) for r in results)
    if not flaming_all:  # a year without a flaming estimate: no flaming (or both-phase) sum or trend
        summary["note_flaming"] = ("the flaming phase is not estimated in year(s) " + ", ".join(
            str(y) for y, r in zip(years, results) if not st.flaming_estimated(r.totals))
            + ": no sum or trend of flaming or both-phase quantities")
        for c in cols:
            if c == "co2e_t" or st.phase_quantity(c)[0] == "flaming":
                values[c] = np.full(len(totals), np.nan)
    if joint is None:
        summary["draws"] = 0
        summary["note"] = "no Monte Carlo draws (uncertainty.draws = 0): sum and trend without intervals"
    else:
        summary["draws"] = joint["draws"]
    q_draws = _with_total_co2e(joint["quantities"]) if joint else {}
    for col in cols:
        v = values[col]
        if not np.all(np.isfinite(v)):
            continue
        phase, qname = st.phase_quantity(col) if col != "co2e_t" else ("both", "co2e_t")
        total_sum = float(v.sum())
        base, last = float(v[base_i]), float(v[last_i])
        entry = {"phase": phase, "quantity": qname, "unit": unit_of.get(col, "t CO2e"),
                 "sum": {"value": total_sum, "lo": None, "hi": None, "lo_independent": None, "hi_independent": None},
                 "trend": {"value": (last - base) / base * 100.0 if base else None, "lo": None, "hi": None,
                           "lo_independent": None, "hi_independent": None}}
        qk = _draw_key(col)
        if qk in q_draws:
            d = q_draws[qk] * 1e-3  # kg -> t
            ind = trend.decorrelate(d, seed=series.runs[base_i].config.uncertainty.seed)
            entry["sum"].update(zip(("lo", "hi"), trend.interval(trend.sum_draws(d))))
            entry["sum"].update(zip(("lo_independent", "hi_independent"), trend.interval(trend.sum_draws(ind))))
            entry["trend"].update(zip(("lo", "hi"), trend.interval(trend.trend_draws(d[base_i], d[last_i]))))
            entry["trend"].update(zip(("lo_independent", "hi_independent"),
                                      trend.interval(trend.trend_draws(ind[base_i], ind[last_i]))))
            if col == "carbon_smouldering_t":
                summary["correlation_carbon_smouldering"] = [[_f(x) for x in row] for row in trend.correlation(d)]
        summary["quantities"].append(entry)
    return summary


def _draw_key(col: str) -> str | None:
    """The draw quantity of a table column (``co2e_t``: both phases' CO2e)."""
    if col == "co2e_t":
        return "co2e_kg"
    from ..science.uncertainty import QUANTITY_COLUMNS

    for pattern in QUANTITY_COLUMNS:
        q = pattern.replace("{gas}", col.split("_")[0]) if "{gas}" in pattern else pattern
        if _column(q) == col:
            return q
    return None


def _total(total: dict, col: str) -> float:
    if col == "co2e_t":
        return float(total["co2e_smouldering_t"]) + float(total["co2e_flaming_t"])
    v = total.get(col)
    return math.nan if v is None else float(v)


def _f(v) -> float | None:
    v = float(v)
    return v if math.isfinite(v) else None


def run_series(series: SeriesConfig, out_dir, *, overwrite: bool = False, workers: int = 1, scheduler=None,
               progress=None, against=None) -> SeriesResult:
    """Run every year of ``series`` into ``out_dir/<year>/`` and write the series outputs.

    ``workers`` and ``scheduler`` are those of :func:`peatburn.engine.runner.run` (a scheduler
    address is connected to once, for every year). ``against`` (an earlier series' output folder)
    adds recalculation.csv: per year, the inputs whose SHA-256 differ, the settings and figures
    that differ. An existing, non-empty ``out_dir`` is refused unless ``overwrite``.
    """
    from ..io.lock import output_lock
    from ..io.result_set import staged
    from ..outputs.checksums import write_series_sums
    from .executors import connect
    from .runner import _moved

    out_dir = Path(out_dir)
    old = _read_earlier(Path(against), series.years) if against is not None else None
    client = connect(scheduler) if isinstance(scheduler, str) else scheduler
    try:
        with output_lock(out_dir):  # one writer per series folder (io.lock)
            # every year and the series tables go into a staging folder, sealed with SHA256SUMS and swapped
            # in whole (io.result_set): a series killed midway leaves the folder's old set as it was
            with staged(out_dir, overwrite) as stage:
                results = []
                for entry in series.runs:
                    cfg = entry.config
                    if series.fire_history and results:
                        cfg = with_history(cfg, results, out_dir, [e.config for e in series.runs[:len(results)]])
                    results.append(run(cfg, stage / str(entry.year), workers=workers, scheduler=client,
                                       progress=progress))
                result = _write(series, stage, results, old)
                result.files["checksums"] = write_series_sums(stage, [str(y) for y in series.years])
            for r in results:
                r.out_dir = out_dir / Path(r.out_dir).name
                r.files = {k: _moved(v, stage, out_dir) for k, v in r.files.items()}
            result.out_dir = out_dir
            result.files = {k: _moved(v, stage, out_dir) for k, v in result.files.items()}
            return result
    finally:
        if client is not scheduler and client is not None:
            client.close()


def _line_draws(years: list, results: list[RunResult], rows: list[dict], joint: dict | None) -> dict:
    """Joint draws of inventory lines [Gg]: a line is its run's total times the calendar year's share
    (outputs.tables.inventory_rows), so its draws are the run's joint draws times the same ratio."""
    if joint is None:
        return {}
    from ..outputs.tables import gas_key

    out = {}
    for r in rows:
        phase, gas = r["phase"], r["gas"]
        stem = "co2e" if gas.startswith("CO2e") else "co2" if gas == "CO2-C" else gas_key(gas)
        i = years.index(r["run_year"])
        total, d = results[i].total.get(f"{stem}_{phase}_t"), joint["quantities"].get(f"{stem}_{phase}_kg")
        if d is None or total is None or not math.isfinite(float(total)):
            continue
        ratio = float(r["emissions_gg"]) / (float(total) * 1e-3) if float(total) else 0.0
        out[(r["run_year"], r["year"], phase, gas)] = d[i] * 1e-6 * ratio  # kg -> Gg
    return out


def refuse_double_count(series: SeriesConfig, results: list[RunResult], cal: int, idx: list[int]) -> None:
    """Refuse to add lines of calendar year ``cal`` from the runs ``idx`` when that counts a fire twice:
    two scars of two runs that overlap in place and in dates (:func:`refuse_same_fire`), or two runs
    with flaming detections on one day of ``cal`` (the same detections may be in both runs)."""
    from itertools import combinations

    refuse_same_fire(series, [(r._parts.scars, r._parts.cfg) for r in results], cal, idx)
    for i, j in combinations(idx, 2):
        both = sorted(_flaming_days(results[i], cal) & _flaming_days(results[j], cal))
        if both:
            raise ConfigError(f"{series.source or 'series'}: calendar year {cal} would count flaming detections "
                              f"twice: the {series.runs[i].year} and {series.runs[j].year} runs both have flaming "
                              f"emissions on {both[0]}{' and later days' if len(both) > 1 else ''}; give each run "
                              f"only the detections of its own fire season")


def scar_periods_of(frame, cfg, year: int) -> list[tuple]:
    """(first, last) day of burning of each scar; a scar without dates burns all of ``year`` (its run's)."""
    import datetime as dt

    from ..outputs import timeline

    return [(a, b) if a is not None else (dt.date(year, 1, 1), dt.date(year, 12, 31))
            for a, b in timeline.scar_periods(frame, cfg.start_field, cfg.end_field)]


def calendar_years(periods: list[tuple]) -> set[int]:
    """The calendar years the scars' days of burning reach."""
    return {y for a, b in periods for y in range(a.year, b.year + 1)}


def refuse_same_fire(series: SeriesConfig, scars: list[tuple], cal: int, idx: list[int]) -> None:
    """Refuse when two runs ``idx`` hold the same fire in calendar year ``cal``: a scar of each that
    overlap in place (an intersection of positive area: more than 1e-6 of the smaller scar) and in
    dates (their days of burning meet, :func:`scar_periods_of`). ``scars``: (scar frame, run
    configuration) of every run of the series, in its order. A scar on ground another run burned on
    other dates is a repeat fire, not refused."""
    import datetime as dt
    from itertools import combinations

    import shapely

    first, last = dt.date(cal, 1, 1), dt.date(cal, 12, 31)
    picked = []
    for i in idx:
        frame, cfg = scars[i]
        periods = scar_periods_of(frame, cfg, series.runs[i].year)
        picked.append((i, frame, cfg, periods, [k for k, (a, b) in enumerate(periods) if a <= last and b >= first]))
    for (i, fa, ca, pa, ka), (j, fb, cb, pb, kb) in combinations(picked, 2):
        if not ka or not kb:
            continue
        gb = fb.geometry if fb.crs == fa.crs else fb.geometry.to_crs(fa.crs)
        ga = np.asarray(fa.geometry.values, dtype=object)
        tree = shapely.STRtree(ga[ka])
        for k in kb:
            g = gb.values[k]
            for hit in tree.query(g, predicate="intersects"):
                m = ka[int(hit)]
                (a0, a1), (b0, b1) = pa[m], pb[k]
                if a0 <= b1 and b0 <= a1 and shapely.intersection(ga[m], g).area > 1e-6 * min(ga[m].area, g.area):
                    raise ConfigError(
                        f"{series.source or 'series'}: calendar year {cal} would count a fire twice: scar "
                        f"{_scar(fa, ca, m)} of the {series.runs[i].year} run ({a0} to {a1}) and scar {_scar(fb, cb, k)} "
                        f"of the {series.runs[j].year} run ({b0} to {b1}) overlap in place and dates; keep the fire "
                        f"in one run's burned area, or correct its fire dates")


def _scar(frame, cfg, k: int) -> str:
    col = cfg.id_field
    if col and col in frame.columns:
        return repr(str(frame[col].iloc[k]))
    return f"#{k + 1}"


def _flaming_days(result: RunResult, cal: int) -> set:
    return {str(r["date"]) for r in result.daily if r.get("phase") == "flaming" and str(r["date"]).startswith(f"{cal}-")
            and (r.get("dry_matter_t") or 0) > 0}


def _read_earlier(folder: Path, years) -> dict:
    if not folder.is_dir():
        raise MissingInputError(f"--against: {folder} is not a folder; give the output folder of an earlier "
                                f"`peatburn series`")
    if not (folder / "series.json").exists():
        raise ConfigError(f"--against: {folder} holds no series.json; give the output folder of an earlier "
                          f"`peatburn series`")
    out = {}
    for y in json.loads((folder / "series.json").read_text(encoding="utf-8")).get("years", []):
        d = folder / str(y)
        if (d / "provenance.json").exists() and (d / "totals.json").exists():
            out[int(y)] = {"provenance": json.loads((d / "provenance.json").read_text(encoding="utf-8")),
                           "totals": json.loads((d / "totals.json").read_text(encoding="utf-8"))}
    return out


def _write(series: SeriesConfig, out_dir: Path, results: list[RunResult], old: dict | None) -> SeriesResult:
    years = series.years
    gases = run_gases(load_factors(series.runs[0].config))
    rows = []
    for entry, r in zip(series.runs, results):
        rows += st.year_rows(entry.year, r.total, run_gases(load_factors(entry.config)), st.flaming_estimated(r.totals))
    joint = joint_draws(series, results)
    summary = joint_summary(series, results, gases, joint)
    rows += st.joint_rows(summary)
    records = [{"totals": r.totals, "provenance": json.loads((Path(r.out_dir) / "provenance.json").read_text(encoding="utf-8"))}
               for r in results]
    changes = [{"from": years[i - 1], "to": years[i],
                "changes": st.changes_between_years(years[i - 1], records[i - 1], years[i], records[i])}
               for i in range(1, len(years))]
    inv = [row for y, r in zip(years, results) for row in st.inventory_rows(y, r.inventory)]
    notes = list(series.notes)
    runs_of: dict = {}
    for row in inv:
        runs_of.setdefault(str(row["year"]), []).append(row["run_year"])
    shared = {c: sorted(set(v)) for c, v in runs_of.items() if len(set(v)) > 1 and c}
    for cal, run_years in shared.items():
        refuse_double_count(series, results, int(cal), [years.index(y) for y in run_years])
    inv = st.combine_calendar_years(inv, _line_draws(years, results, [r for r in inv if str(r["year"]) in shared],
                                                     joint))
    for cal, run_years in sorted(shared.items()):
        how = sorted({r["interval"] for r in inv if str(r["year"]) == cal and r["interval"]})
        notes.append(f"inventory: calendar year {cal} has fires of the runs of {' and '.join(map(str, run_years))} "
                     f"(scar fire dates across the new year): one line per phase and gas, their sum (no scar of one run "
                     f"overlaps a scar of the other in place and dates); intervals: {', '.join(how) or 'none'} "
                     f"(docs/configuration.md, \"The series file\")")
    other = sorted({str(row["year"]) for row in inv if str(row["year"]) not in shared
                    and str(row["year"]) != str(row["run_year"])})
    if other:
        notes.append(f"inventory lines of calendar year(s) {', '.join(other)} come from a run of another series year "
                     f"(scar fire dates)")
    if summary.get("note_flaming"):
        notes.append(summary["note_flaming"])
    if series.fire_history and len(years) > 1:
        notes.append("fire history: each year after the first used the burn depths of the earlier years (thickness "
                     "left, repeat-fire status); docs/method.md 7.7")
    files = {}
    files["series"] = write_csv(out_dir / "series.csv", rows, st.SERIES_COLUMNS)
    files["inventory"] = write_csv(out_dir / "inventory.csv", inv, st.SERIES_INVENTORY_COLUMNS)
    gwp = results[0].totals["method"]["gwp"]
    from ..outputs.tables import INVENTORY_CONVENTIONS

    files["inventory_json"] = write_json(out_dir / "inventory.json", {
        "unit": "Gg", "gwp": gwp, "years": years, "conventions": INVENTORY_CONVENTIONS, "rows": inv})
    recalc = None
    if old is not None:
        recalc = [row for y, rec in zip(years, records) for row in st.recalculation_rows(y, old.get(y), rec)]
        recalc += [{"year": y, "what": "year", "key": "", "old": "in the earlier series", "new": "not in this series"}
                   for y in sorted(set(old) - set(years))]
        files["recalculation"] = write_csv(out_dir / "recalculation.csv", recalc, st.RECALCULATION_COLUMNS)
    doc = {"series": series.name, "source": str(series.source) if series.source else None, "years": years,
           "base_year": series.base_year, "fire_history": series.fire_history, "shared": series.shared,
           "joint": summary, "changes_between_years": changes, "notes": notes, "cautions": CAUTIONS,
           "method_shares": {y: st.method_shares(r.totals) for y, r in zip(years, results)},
           "year_folders": {y: str(y) for y in years}}
    files["series_json"] = write_json(out_dir / "series.json", doc)
    from ..outputs import series_report

    files["report"] = series_report.write_series_report(out_dir / "series_report.html", series, results, rows, doc,
                                                        recalc)
    return SeriesResult(out_dir, years, results, rows, summary, files, recalc)
