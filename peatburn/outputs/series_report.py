"""series_report.html: one self-contained page for a series of yearly runs.

A time-series chart of the yearly emissions with their intervals, the multi-year sum and the trend
(last year vs base year) from the joint draws beside the same draws made independent between years,
the method shares by year, what changed between years, the notes and cautions, and links to each
year's own report. Rendered like report.html (Jinja2 with autoescape, matplotlib's object API, PNG
``data:`` URIs, Okabe-Ito colours: see peatburn.outputs.report).
"""

from __future__ import annotations

import datetime as dt
from importlib import resources
from pathlib import Path

import numpy as np

from .. import __version__
from ..io.writers import write_text
from .report import (PHASE_COLOURS, _figure, _finite, _png, _style, fmt_interval, fmt_num, fmt_pct, fmt_range,
                     method_bars)


def _year_values(rows: list[dict], phase: str, quantity: str):
    pick = [r for r in rows if r["kind"] == "year" and r["phase"] == phase and r["quantity"] == quantity]
    return ([r["year"] for r in pick], np.array([_finite(r["value"]) or 0.0 for r in pick]),
            np.array([_finite(r["lo"]) if _finite(r["lo"]) is not None else np.nan for r in pick]),
            np.array([_finite(r["hi"]) if _finite(r["hi"]) is not None else np.nan for r in pick]))


def timeseries_chart(rows: list[dict]) -> str | None:
    """CO2e of each phase by year, with the 95 % interval of each year as an error bar."""
    with _style():
        fig = _figure(7.4, 3.0)
        ax = fig.add_subplot()
        drawn = False
        for k, phase in enumerate(("smouldering", "flaming")):
            years, v, lo, hi = _year_values(rows, phase, "co2e_t")
            if not years or not np.any(v):
                continue
            x = np.array(years, dtype=float) + (k - 0.5) * 0.12
            err = None
            if np.all(np.isfinite(lo)) and np.all(np.isfinite(hi)):
                err = np.vstack([np.clip(v - lo, 0, None), np.clip(hi - v, 0, None)])
            ax.errorbar(x, v, yerr=err, fmt="o-", capsize=4, color=PHASE_COLOURS[phase], lw=1.4, ms=5,
                        label=f"{'below ground (smouldering)' if phase == 'smouldering' else 'above ground (flaming)'}")
            drawn = True
        if not drawn:
            return None
        years = sorted({r["year"] for r in rows if r["kind"] == "year"})
        ax.set_xticks(years)
        ax.set_xlim(years[0] - 0.5, years[-1] + 0.5)
        ax.set_ylabel("t CO₂e per year")
        ax.set_ylim(bottom=0)
        ax.legend(frameon=False, loc="best")
        ax.set_title("Emissions by year, with 95 % intervals (bars)")
        return _png(fig)


_SUM_TREND = (("smouldering", "below ground"), ("flaming", "above ground"), ("both", "both phases"))


def sum_trend_chart(summary: dict) -> str | None:
    """The multi-year sum [t CO2e] and the trend [%] of each phase's CO2e, each with its 95 % interval
    from the joint draws (filled marker) beside the same draws made independent between years
    (hollow marker, dashed): how much the shared factors widen or narrow them."""
    by = {q["phase"]: q for q in summary.get("quantities", []) if q["quantity"] == "co2e_t"}
    picked = [(phase, label, by[phase]) for phase, label in _SUM_TREND if phase in by]
    if not picked or all(_finite(q["sum"]["lo"]) is None for _, _, q in picked):
        return None
    colour = {**PHASE_COLOURS, "both": "#000000"}
    with _style():
        fig = _figure(7.4, 2.8)
        axes = fig.subplots(1, 2)
        for ax, part, ylabel in ((axes[0], "sum", f"t CO₂e, {summary['span']}"),
                                 (axes[1], "trend", f"% change {summary['trend_years'].replace('-', '→')}")):
            for k, (phase, _, q) in enumerate(picked):
                d = q[part]
                if _finite(d["value"]) is None:
                    continue
                for dx, lo, hi, filled in ((-0.14, d["lo"], d["hi"], True),
                                           (0.14, d["lo_independent"], d["hi_independent"], False)):
                    if _finite(lo) is None or _finite(hi) is None:
                        continue
                    v = d["value"]
                    bars = ax.errorbar([k + dx], [v], yerr=[[max(v - lo, 0.0)], [max(hi - v, 0.0)]], fmt="o",
                                       capsize=4, ms=5, lw=1.4, color=colour[phase],
                                       mfc=colour[phase] if filled else "white",
                                       label=("joint draws" if filled else "years independent") if k == 0 else None)
                    if not filled:
                        bars[-1][0].set_linestyle("--")
            ax.set_xticks(range(len(picked)), [label for _, label, _ in picked])
            ax.set_xlim(-0.6, len(picked) - 0.4)
            ax.set_ylabel(ylabel)
            if part == "sum":
                ax.set_ylim(bottom=0)
            else:
                ax.axhline(0.0, color="#888888", lw=0.8)
        axes[0].set_title("Sum of the years, 95 % intervals")
        axes[1].set_title("Trend, 95 % intervals")
        axes[0].legend(frameon=False, loc="best")
        return _png(fig)


def method_share_by_year_chart(shares: dict) -> str | None:
    """Share of below-ground carbon by depth method, one bar per year (stacked to 100 %)."""
    years = sorted(shares, key=int)
    if not years:
        return None
    with _style():
        fig = _figure(7.4, 0.32 * len(years) + 1.2)
        ax = fig.add_subplot()
        y = method_bars(ax, [shares[yr] for yr in years], height=0.6)
        ax.set_yticks(y, [str(yr) for yr in years])
        ax.set_ylim(len(years) - 0.5, -0.5)
        ax.set_xlim(0, 100)
        ax.set_xlabel("share of below-ground carbon by the method that gave the burn depth [%]")
        ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.35), ncols=3, frameon=False)
        return _png(fig)


_YEAR_TABLE = [("all", "burned_area_ha", "Burned area", "ha"),
               ("smouldering", "carbon_t", "Carbon, below ground", "t C"),
               ("smouldering", "co2e_t", "CO₂e, below ground", "t CO₂e"),
               ("flaming", "carbon_t", "Carbon, above ground", "t C"),
               ("flaming", "co2e_t", "CO₂e, above ground", "t CO₂e")]


def _year_table(rows: list[dict], shares: dict) -> dict:
    years = sorted({r["year"] for r in rows if r["kind"] == "year"})
    by = {(r["year"], r["phase"], r["quantity"]): r for r in rows if r["kind"] == "year"}
    out = []
    for y in years:
        cells = []
        for phase, q, _, _ in _YEAR_TABLE:
            r = by.get((y, phase, q))
            cells.append("–" if r is None else fmt_interval(r["value"], r["lo"], r["hi"]))
        sh = shares.get(y) or shares.get(str(y)) or {}
        cells.append(fmt_pct(sh.get("survey")))
        out.append({"year": y, "cells": cells})
    return {"head": [f"{label} [{unit}]" for _, _, label, unit in _YEAR_TABLE] + ["Carbon from surveyed depth"],
            "rows": out}


def _joint_table(summary: dict) -> list[dict]:
    out = []
    for q in summary.get("quantities", []):
        s, t = q["sum"], q["trend"]
        out.append({"quantity": f"{q['quantity']} ({q['phase']})", "unit": q["unit"],
                    "sum": fmt_num(s["value"]), "sum_joint": fmt_range(s["lo"], s["hi"]) or "–",
                    "sum_ind": fmt_range(s["lo_independent"], s["hi_independent"]) or "–",
                    "trend": "–" if t["value"] is None else f"{t['value']:+.1f} %",
                    "trend_joint": _pct_range(t["lo"], t["hi"]),
                    "trend_ind": _pct_range(t["lo_independent"], t["hi_independent"])})
    return out


def _pct_range(lo, hi) -> str:
    if _finite(lo) is None or _finite(hi) is None:
        return "–"
    return f"{lo:+.1f} to {hi:+.1f} %"


def build_context(series, results, rows: list[dict], doc: dict, recalc=None) -> dict:
    shares = doc["method_shares"]
    return {
        "version": __version__,
        "name": series.name,
        "years": doc["years"],
        "base_year": doc["base_year"],
        "created": dt.datetime.now(dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC"),
        "timeseries": timeseries_chart(rows),
        "sum_trend": sum_trend_chart(doc["joint"]),
        "method_chart": method_share_by_year_chart(shares),
        "year_table": _year_table(rows, shares),
        "joint": _joint_table(doc["joint"]),
        "draws": doc["joint"].get("draws", 0),
        "shared_sources": doc["joint"].get("shared_sources", []),
        "correlation": doc["joint"].get("correlation_carbon_smouldering"),
        "changes": doc["changes_between_years"],
        "notes": doc["notes"],
        "cautions": doc["cautions"],
        "fire_history": doc["fire_history"],
        "shared": doc["shared"],
        "recalc": recalc,
        "links": [{"year": y, "href": f"{y}/report.html"} for y in doc["years"]],
        "palette": {"smouldering": PHASE_COLOURS["smouldering"], "flaming": PHASE_COLOURS["flaming"]},
    }


def render(context: dict) -> str:
    from jinja2 import Environment, StrictUndefined

    env = Environment(autoescape=True, undefined=StrictUndefined, trim_blocks=True, lstrip_blocks=True)
    text = resources.files("peatburn.outputs").joinpath("templates/series_report.html").read_text(encoding="utf-8")
    return env.from_string(text).render(**context)


def write_series_report(final: Path, series, results, rows, doc, recalc=None) -> Path:
    """Render series_report.html and write it atomically; returns its path."""
    return write_text(final, render(build_context(series, results, rows, doc, recalc)))
