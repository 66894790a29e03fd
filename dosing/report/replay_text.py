"""A replay and a fleet replay as text for the engineer, read from their typed reports."""

from __future__ import annotations

from ..planning.replay_totals import ReplayReport
from .numbers import fmt
from .text import hanging, wrap
from .units import UNIT_SYSTEMS, money_text, product_text

__all__ = ["render_replay", "render_fleet"]


def render_replay(r: ReplayReport, units: str = "metric", width: int = 78) -> str:
    """The replay summary as text for the engineer."""
    u = UNIT_SYSTEMS[units]
    by_mass = r.rate_unit == "kg/h"
    conv = u.mass_per_kg if by_mass else u.product_volume_per_l
    rate_unit = f"{u.mass}/h" if by_mass else f"{u.product_volume}/h"
    out = [f"REPLAY  {r.title}  [{r.reagent}]", "=" * 40]
    out += hanging("data", f"{r.source}: {r.rows:,} rows, {r.first} to {r.last} "
                   f"({fmt(r.hours_covered / 24)} days)", width, indent=9)
    out += [f"planned  {r.rows_planned:,} rows; not planned {r.rows_not_planned:,}"]
    for n, why in r.not_planned.values():
        out.append(f"           {n:>9,}  {why}")
    out += ["", "REAGENT",
            f"  total          {fmt(r.kg_product * u.mass_per_kg)} {u.mass}"
            + (f" = {fmt(r.litres_product * u.product_volume_per_l)} {u.product_volume}"
               if r.litres_product else "")
            + (f", cost {money_text(r.cost, r.currency)}" if r.cost is not None else ""),
            f"  per day        mean {fmt(r.mean_kg_per_day * u.mass_per_kg)} "
            f"{u.mass}, max {fmt(r.max_kg_per_day * u.mass_per_kg)} {u.mass} "
            f"over {r.days} days"]
    if r.days_of_supply is not None:
        out.append(f"  storage lasts  {fmt(r.days_of_supply)} days at the mean daily use")
    low = r.rate_p5_nonzero
    out += ["", "DOSE RATE (metering pump sizing)",
            f"  mean {fmt(r.rate_mean * conv)}  95th percentile {fmt(r.rate_p95 * conv)}  "
            f"max {fmt(r.rate_max * conv)}  {rate_unit}",
            f"  lowest steady rate (5th percentile of non-zero) "
            f"{fmt(low * conv if low else None)} {rate_unit}; "
            f"turndown needed {fmt(r.turndown)} : 1",
            "  (percentiles from 2.3 % wide bins)", "",
            f"RAW EFFLUENT outside the window {fmt(r.hours_outside_window)} h"
            + (f" ({r.fraction_outside_window:.0%} of the time)"
               if r.fraction_outside_window is not None else ""), "", "CAUTIONS"]
    for c in r.cautions:
        out.extend(wrap(c, width, "  - "))
    return "\n".join(out) + "\n"


def render_fleet(report, units: str = "metric", width: int = 78) -> str:
    """The fleet replay (a :class:`dosing.io.fleet.FleetReport`) as text: one
    line per site, then totals per product."""
    r = report
    out = [f"FLEET REPLAY  {r.fleet}  {len(r.sites)} sites, {r.rows:,} rows "
           f"({r.rows_planned:,} planned), {r.workers} Dask workers", "=" * 40,
           "", f"{'site':<18} {'product':>18} {'per day':>12} {'95th pct rate':>14} "
           f"{'raw outside':>11}", f"{'':<18} {'over the record':>18} {'mean':>12} "
           f"{'(pump sizing)':>14} {'window':>11}"]
    for name, site in r.sites.items():
        out.append(_fleet_site_line(name, site, units))
        if site.rows_not_planned:
            top = max(site.not_planned.values(), key=lambda nw: nw[0])
            out.extend(wrap(f"{site.rows_not_planned:,} of {site.rows:,} rows not "
                            f"planned (most: {top[1]})", width, " " * 19))
    out += ["", "BY PRODUCT (amounts of different products are never added)"]
    for pid, p in r.products.items():
        unpriced = p.sites_without_price
        if p.cost is None:
            cost = ", cost not added: the sites price it in different currencies"
        elif not unpriced:
            cost = f", cost {money_text(p.cost, p.currency)}"
        elif len(unpriced) < len(p.sites):
            cost = (f", cost {money_text(p.cost, p.currency)} not counting "
                    f"{', '.join(unpriced)} (no price)")
        else:
            cost = ""
        n = len(p.sites)
        line = (f"{p.reagent_name} [{pid}], {n} site{'s' if n != 1 else ''}: "
                f"{product_text(p.kg_product, p.litres_product or None, units)}{cost}")
        out.extend(wrap(line, width, "  "))
    out += ["", "CAUTIONS"]
    for c in r.cautions:
        out.extend(wrap(c, width, "  - "))
    return "\n".join(out) + "\n"


def _fleet_site_line(name: str, site: ReplayReport, units: str) -> str:
    """One site of the fleet table: total product, mean per day, 95th
    percentile rate and hours the raw effluent was outside the window."""
    u = UNIT_SYSTEMS[units]
    if site.rate_unit == "kg/h":
        total = f"{fmt(site.kg_product * u.mass_per_kg)} {u.mass}"
        day = f"{fmt(site.mean_kg_per_day * u.mass_per_kg)} {u.mass}"
        p95 = f"{fmt(site.rate_p95 * u.mass_per_kg)} {u.mass}/h"
    else:
        total = f"{fmt(site.litres_product * u.product_volume_per_l)} {u.product_volume}"
        day = f"{fmt(site.mean_litres_per_day * u.product_volume_per_l)} {u.product_volume}"
        p95 = f"{fmt(site.rate_p95 * u.product_volume_per_l)} {u.product_volume}/h"
    label = name if len(name) <= 18 else name[:17] + "…"
    return (f"{label:<18} {total:>18} {day:>12} {p95:>14} "
            f"{fmt(site.hours_outside_window) + ' h':>11}")
