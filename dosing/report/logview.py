"""Shift-log entries as text, shared by the command line and Tankside."""

from __future__ import annotations

from .numbers import fmt
from ..chem.metals import label
from ..planning.reagents import GENERAL_CAUTION
from ..io.shiftlog import Entry, ShiftLog
from .text import wrap
from .words import bias_words

__all__ = ["render_list", "render_entry", "unreadable_line"]


def _n(x, digits=3) -> str:
    return "-" if x is None else fmt(x, digits)


def _kg(e: Entry, kg) -> str:
    """An amount of an entry with its unit: kg for a batch, kg/h for a flow."""
    if kg is None:
        return "-"
    per = "/h" if "kg_product_per_h" in ((e.plan or {}).get("dose") or {}) else ""
    return f"{fmt(kg)} kg{per}"


def _pct(ratio) -> str:
    return "-" if ratio is None else f"{ratio:.0%}"


_KIND = {"decision": "dec", "correction": "corr", "follow_up": "f-up"}


def _row(log: ShiftLog, e: Entry, wide: bool, corrected: bool) -> str:
    """One entry as a line of the list (78 columns, or all of them with ``wide``)."""
    mark = "*" if corrected else " "
    if wide:
        return (f"{e.id:>5}{mark} {e.local_time[:19]:<19}  {e.kind:<10}  {e.tank[:14]:<14}  "
                f"{e.reagent[:16]:<16}  {e.operator[:10]:<10}  {_kg(e, e.planned_kg):>12}  "
                f"{_kg(e, e.dosed_kg):>12}  {_pct(e.dosed_ratio):>5}  {_n(e.ph_planned):>6}  "
                f"{_n(log.latest_ph(e)):>8}  {e.refers_to or ''}")
    when = e.local_time[5:16].replace("T", " ")
    return (f"{e.id:>4}{mark} {when:<11} {_KIND.get(e.kind, e.kind)[:4]:<4} {e.tank[:8]:<8} "
            f"{e.reagent[:12]:<12} {_kg(e, e.planned_kg):>10} {_kg(e, e.dosed_kg):>10} "
            f"{_pct(e.dosed_ratio):>5} {_n(log.latest_ph(e)):>5}")


def render_list(log: ShiftLog, *, since_utc: str | None = None, tank: str | None = None,
                wide: bool = False) -> str:
    """One line per entry, with planned vs dosed and the latest pH after; 78
    columns (operator, pH aim and the entry referred to with ``wide``).
    An entry a later correction replaces is marked with a star."""
    head = (f"{'id':>5}  {'local time':<19}  {'kind':<10}  {'tank':<14}  {'reagent':<16}  "
            f"{'operator':<10}  {'planned':>12}  {'dosed':>12}  {'ratio':>5}  "
            f"{'pH aim':>6}  {'pH after':>8}  refers") if wide else (
            f"{'id':>4}  {'time':<11} {'kind':<4} {'tank':<8} {'reagent':<12} "
            f"{'planned':>10} {'dosed':>10} {'ratio':>5} {'pH':>5}")
    lines = [head, "-" * len(head)]
    entries = list(log.entries(since_utc=since_utc, tank=tank))
    corrected = {e.refers_to for e in entries if e.kind == "correction"}
    lines += [_row(log, e, wide, e.id in corrected) for e in entries]
    if not entries:
        lines.append("(no entries)")
    elif corrected:
        lines.append("* corrected by a later entry (dosing log show ID)")
    if not wide:
        lines.append("pH: the latest reading after the dose; --wide adds operator, aim, refers")
    if log.unreadable:
        lines.append(unreadable_line(log).rstrip("\n"))
    for name in ([tank] if tank else log.tanks()):
        b = log.bias(name)
        if b is not None:
            lines.append(("!! " if b.due else "") + bias_words(b))
    lines.append("")
    lines.extend(wrap(GENERAL_CAUTION, 78, ""))
    return "\n".join(lines) + "\n"


def unreadable_line(log: ShiftLog) -> str:
    """A line naming the entries a damaged log could not give back (or nothing)."""
    if not log.unreadable:
        return ""
    ids = ", ".join(str(i) for i in log.unreadable[:12])
    more = " ..." if len(log.unreadable) > 12 else ""
    return (f"!! THE LOG IS DAMAGED: {len(log.unreadable)} entries could not be read "
            f"(ids {ids}{more}); it takes no new entries until replaced\n")


def render_entry(log: ShiftLog, e: Entry) -> str:
    """An entry in full, with what corrects it and its follow-ups."""
    out = [f"entry {e.id} ({e.kind}), {e.local_time} local, {e.utc} UTC",
           f"  operator {e.operator}; site {e.site or '-'}; tank {e.tank or '-'}; "
           f"engine {e.engine_version}"]
    if e.title:
        out.append(f"  scenario: {e.title}")
    if e.refers_to:
        verb = "corrects" if e.kind == "correction" else "follows up"
        out.append(f"  {verb} entry {e.refers_to}")
    plan = e.plan
    if plan and plan.get("steps"):
        out.extend(_train_lines(plan))
    elif plan:
        dose = plan.get("dose", {})
        per = " per hour" if "kg_product_per_h" in dose else ""
        out.append(f"  planned: {_n(e.planned_kg)} kg{per} of {plan.get('reagent_name', e.reagent)}"
                   f" ({_n(dose.get('mmol_per_l'))} mmol/L), pH {_n(e.ph_start)} to "
                   f"{_n(e.ph_planned)}")
        out.extend(_solid_lines(plan, per))
        out.extend(_staging_lines(plan))
    if e.dosed_kg is not None:
        out.append(f"  actually dosed: {_kg(e, e.dosed_kg)}"
                   + (f" ({_pct(e.dosed_ratio)} of plan)" if e.dosed_ratio else ""))
    if e.ph_after is not None:
        out.append(f"  pH after: {_n(e.ph_after)}")
    if e.note:
        out.append(f"  note: {e.note}")
    for r in log.related(e.id):
        if r.kind == "follow_up":
            out.append(f"  follow-up {r.id} at {r.local_time}: pH {_n(r.ph_after)}"
                       + (f" ({r.note})" if r.note else "")
                       + (f" by {r.operator}" if r.operator != "-" else ""))
        else:
            out.append(f"  CORRECTED by entry {r.id} at {r.local_time} ({r.operator})")
    if plan:
        for w in plan.get("warnings", []):
            out.append(f"  ! {w}")
        for c in plan.get("cautions", []):
            out.append(f"  - {c}")
    return "\n".join(out) + "\n"


def _train_lines(plan: dict) -> list[str]:
    """A recorded treatment train: each step as planned, and what was given."""
    given = plan.get("given_kg", {})
    head = "proposed by the planner" if plan.get("train", {}).get("proposed") else "its steps"
    out = [f"  treatment train, {head}:"]
    for s in plan["steps"]:
        what = f"    {s['step']} {s['kind']}" + (f" ({s['label']})" if s.get("label") else "")
        dose = s.get("dose") or {}
        kg = dose.get("kg_product", dose.get("kg_product_per_h"))
        if s["kind"] == "dose":
            what += (f": {_n(kg)} kg of {s.get('reagent', '?')} planned"
                     + (f", {_n(given[str(s['step'])])} kg given" if str(s["step"]) in given
                        else ""))
        out.append(what + f", pH {_n(s.get('ph_in'))} to {_n(s.get('ph_after'))}")
    d = plan.get("train", {}).get("discharge", {})
    if d:
        out.append(f"  discharge at pH {_n(d.get('ph'))}: "
                   + ("window and caps met" if d.get("met") else "NOT MET"))
    return out


def _staging_lines(plan: dict) -> list[str]:
    """The staged dose and trim table recorded with the plan (the pH readings
    actually taken follow as follow-ups)."""
    st = plan.get("staging")
    if not st:
        return []
    first = st["first"]
    out = [f"  staged: first dose {_n(first.get('kg_product'))} kg, then by the pH read "
           f"(lands in the window in {st['p_inside_window_after_trim']:.0%} of plausible "
           "waters" + (f", pH read to ±{st['reading_sd_ph']:g}" if st.get("reading_sd_ph")
                       else "") + "):"]
    rows = [f"pH {r['ph_read']:.1f} +{_n(r.get('extra_kg_product'))} kg"
            for r in st["trim"] if not r["at_or_past_aim"]]
    out.append("    " + "; ".join(rows))
    return out


def _solid_lines(plan: dict, per: str) -> list[str]:
    """Solids, sludge and metals left, as recorded with the plan."""
    sfx = "_per_h" if per else ""
    out = [f"  solid: {x['formula']} {_n(x['mg_per_l'])} mg/L = {_n(x.get('kg' + sfx))} kg{per}"
           for x in plan.get("solids", [])]
    sludge = plan.get("sludge") or {}
    if plan.get("solids") and sludge.get("dry_kg" + sfx) is not None:
        out.append(f"  sludge: {_n(sludge['dry_kg' + sfx])} kg dry{per}")
    left = plan.get("metals_after_mg_l") or {}
    if left:
        out.append("  metals left: " + ", ".join(
            f"{label(k)} {fmt(v, floor=1e-3)} mg/L" for k, v in left.items()))
    return out
