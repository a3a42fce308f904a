"""The short summary a run prints: a table of zones and the cautions."""

from __future__ import annotations

import click

from ..engine.runner import CAUTIONS
from ..names import printable


def _n(v) -> str:
    try:
        v = float(v)
    except (TypeError, ValueError):
        return str(v)
    if v != v:
        return "-"
    return f"{v:,.1f}" if abs(v) >= 10 else f"{v:.3g}"


def _iv(r, k) -> str:
    v = _n(r[k])
    lo, hi = r.get(f"{k}_lo"), r.get(f"{k}_hi")
    if lo is None or hi is None:
        return v
    return f"{v} ({_n(lo)}-{_n(hi)})"


def print_summary(result) -> None:
    cols = [("layer", "layer"), ("zone", "zone"), ("burned_area_ha", "area [ha]"),
            ("mean_burn_depth_m", "depth [m]"), ("carbon_smouldering_t", "C below ground [t]"),
            ("co2e_smouldering_t", "CO2e below [t]"), ("carbon_flaming_t", "C flaming [t]")]
    rows = [[printable(r[k]) if k in ("layer", "zone") else (_iv(r, k) if k.endswith("_t") else _n(r[k]))
             for k, _ in cols] for r in result.zones]
    head = [h for _, h in cols]
    widths = [max(len(h), *(len(r[i]) for r in rows)) for i, h in enumerate(head)]
    line = "  ".join(h.ljust(w) if i < 2 else h.rjust(w) for i, (h, w) in enumerate(zip(head, widths)))
    click.echo(line)
    click.echo("-" * len(line))
    for r in rows:
        click.echo("  ".join(c.ljust(w) if i < 2 else c.rjust(w) for i, (c, w) in enumerate(zip(r, widths))))
    click.echo("")
    qa = result.qa
    if "shift_x_m" in qa:
        click.echo(f"survey QA: shift x {qa['shift_x_m']:.2f} m, y {qa['shift_y_m']:.2f} m, vertical "
                   f"{qa['vertical_offset_m']:.2f} m; stable NMAD {qa['stable_nmad_before_m']:.3f} -> "
                   f"{qa['stable_nmad_after_m']:.3f} m; level of detection {qa['level_of_detection_m']:.3f} m")
    shares = result.totals["method"]["depth"]
    click.echo("depth method, share of below-ground carbon: " + ", ".join(
        f"{m} {100 * (v['share_of_carbon'] or 0):.0f} %" for m, v in shares.items()))
    if result.totals["method"].get("tier1_only"):
        click.echo("method: Tier 1 only (no survey, no water table): the IPCC default on every burned pixel of organic soil")
    mineral = result.totals["method"].get("mineral_soil_area_ha")
    if mineral:
        click.echo(f"burned mineral soil (no peat burned): {_n(mineral)} ha")
    unc = result.totals.get("uncertainty")
    if unc:
        top = sorted(((v or 0, k) for k, v in unc["contributions"].items()), reverse=True)[:3]
        click.echo(f"intervals: 95 % from {unc['draws']} Monte Carlo draws (seed {unc['seed']}); largest sources of "
                   f"variance: " + ", ".join(f"{k} {100 * v:.0f} %" for v, k in top))
    else:
        click.echo("intervals: none (uncertainty.draws = 0): central estimates only")
    for n in result.totals.get("notes", []):
        click.echo(f"note: {printable(n)}")  # notes may quote names from input files
    click.echo("")
    for c in CAUTIONS:
        click.echo(f"caution: {c}")
    click.echo(f"outputs: {result.out_dir}")


def echo_pdfs_and_dossiers(result, pdf: bool) -> None:
    """The lines naming the PDF report and the dossiers of a run."""
    if pdf:
        click.echo(f"report (PDF): {result.files['report_pdf']}")
    if result.files.get("dossiers"):
        click.echo(f"dossiers: {len(result.files['dossiers'])} in {result.out_dir / 'dossiers'}"
                   f"{' (HTML and PDF)' if pdf else ''}")
