"""The short summary a run prints: a table of zones and the cautions."""

from __future__ import annotations

import click

from ..runner import CAUTIONS


def _n(v) -> str:
    try:
        v = float(v)
    except (TypeError, ValueError):
        return str(v)
    if v != v:
        return "-"
    return f"{v:,.1f}" if abs(v) >= 10 else f"{v:.3g}"


def print_summary(result) -> None:
    cols = [("layer", "layer"), ("zone", "zone"), ("burned_area_ha", "area [ha]"),
            ("mean_burn_depth_m", "depth [m]"), ("carbon_smouldering_t", "C below [t]"),
            ("co2e_smouldering_t", "CO2e below [t]"), ("carbon_flaming_t", "C flaming [t]")]
    rows = [[str(r[k]) if k in ("layer", "zone") else _n(r[k]) for k, _ in cols] for r in result.zones]
    head = [h for _, h in cols]
    widths = [max(len(h), *(len(r[i]) for r in rows)) for i, h in enumerate(head)]
    line = "  ".join(h.ljust(w) if i < 2 else h.rjust(w) for i, (h, w) in enumerate(zip(head, widths)))
    click.echo(line)
    click.echo("-" * len(line))
    for r in rows:
        click.echo("  ".join(c.ljust(w) if i < 2 else c.rjust(w) for i, (c, w) in enumerate(zip(r, widths))))
    qa = result.qa
    click.echo("")
    click.echo(f"survey QA: shift x {qa['shift_x_m']:.2f} m, y {qa['shift_y_m']:.2f} m, vertical "
               f"{qa['vertical_offset_m']:.2f} m; stable NMAD {qa['stable_nmad_before_m']:.3f} -> "
               f"{qa['stable_nmad_after_m']:.3f} m; level of detection {qa['level_of_detection_m']:.3f} m")
    click.echo("no uncertainty intervals in this version: central estimates only.")
    click.echo("")
    for c in CAUTIONS:
        click.echo(f"caution: {c}")
    click.echo(f"outputs: {result.out_dir}")
