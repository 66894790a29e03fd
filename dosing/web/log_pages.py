"""The site's pages for the shift log: the list with its filters, one entry
with its corrections, follow-ups and reviews, follow-ups and reviews
recorded, the CSV export, the audit, and an engineer's scenario edit."""

from __future__ import annotations

import csv
from datetime import datetime

from starlette.responses import RedirectResponse, Response

from ..errors import DosingError, InputError, ShiftLogError
from .auth import Ctx

__all__ = ["log_list", "entry_page", "follow_up", "correct", "review", "export_csv", "audit_page",
           "edit_scenario"]


def _filters(ctx: Ctx) -> tuple[dict[str, str], str | None]:
    """The list's filters as typed, and the UTC start they give (None: all)."""
    from ..io.shiftlog import parse_since
    q = ctx.request.query_params
    f = {k: (q.get(k) or "").strip()[:80] for k in ("tank", "since", "operator")}
    return f, parse_since(f["since"]) if f["since"] else None


def _entries(ctx: Ctx):
    f, since = _filters(ctx)
    with ctx.site.log() as log:
        every = list(log.entries())           # read once: the list and its operators
        unreadable = list(log.unreadable)
        entries = [e for e in every if (since is None or e.utc >= since)
                   and (not f["tank"] or e.tank == f["tank"])
                   and (not f["operator"] or e.operator == f["operator"])]
        latest = {e.id: log.latest_ph(e) for e in entries}
        tanks, operators = log.tanks(), sorted({e.operator for e in every})
    return f, entries, unreadable, latest, tanks, operators


def log_list(ctx: Ctx) -> Response:
    try:
        f, entries, unreadable, latest, tanks, operators = _entries(ctx)
    except InputError as err:
        return ctx.render("error.html", 422, title="Filter refused", message=str(err))
    from .pages import kg_unit
    corrected = {e.refers_to for e in entries if e.kind == "correction"}
    return ctx.render("log.html", title="Shift log", filters=f, entries=entries[::-1],
                      latest=latest, unit={e.id: kg_unit(e) for e in entries}, corrected=corrected, unreadable=unreadable,
                      tanks=tanks, operators=operators, query=ctx.request.url.query)


def entry_page(ctx: Ctx, message: str = "", status: int = 200) -> Response:
    from ..report.logview import render_entry
    entry_id = ctx.request.path_params["id"]
    try:
        with ctx.site.log() as log:
            e = log.get(entry_id)
            text = render_entry(log, e)
            related = log.related(entry_id)
            reviews = log.reviews(entry_id)
    except ShiftLogError as err:
        return ctx.render("error.html", 404, title="No such entry", message=str(err))
    return ctx.render("entry.html", status, title=f"Entry {entry_id}", e=e, text=text,
                      related=related, reviews=reviews, message=message)


def follow_up(ctx: Ctx) -> Response:
    from ..io.typed import read_number
    entry_id = ctx.request.path_params["id"]
    text = ctx.form.get("ph_after", "").strip()
    try:
        try:
            ph = read_number(text)
        except ValueError:
            raise InputError("ph_after", f"{text!r} is not a pH; allowed: 0 to 14") from None
        with ctx.site.log() as log:
            new = log.record_follow_up(entry_id, ph_after=ph, operator=ctx.who,
                                       note=ctx.form.get("note", "")[:2000])
            log.audit(ctx.who, ctx.address, "follow_up", f"entry {new} on {entry_id}")
    except (DosingError, ValueError) as err:
        return entry_page(ctx, str(err), 422)
    return RedirectResponse(f"/log/{entry_id}", 303)


def correct(ctx: Ctx) -> Response:
    """A correction of a decision: the same water planned again from the
    scenario the entry recorded, with what was really given."""
    from .pages import record_planned
    from .site import plan_text
    entry_id = ctx.request.path_params["id"]
    try:
        with ctx.site.log() as log:
            e = log.get(entry_id)
        if e.kind == "follow_up" or not e.scenario_toml:
            raise InputError("entry", f"entry {entry_id} is not a decision; correct the "
                             "decision it follows up")
        new = record_planned(ctx, plan_text(f"entry-{entry_id}", e.scenario_toml, None),
                             corrects=entry_id)
    except DosingError as err:
        return entry_page(ctx, str(err), 422)
    return RedirectResponse(f"/log/{new}", 303)


def review(ctx: Ctx) -> Response:
    entry_id = ctx.request.path_params["id"]
    try:
        with ctx.site.log() as log:
            log.review(entry_id, ctx.who, ctx.form.get("note", "")[:2000])
            log.audit(ctx.who, ctx.address, "review", f"entry {entry_id}")
    except DosingError as err:
        return entry_page(ctx, str(err), 422)
    return RedirectResponse(f"/log/{entry_id}", 303)


def export_csv(ctx: Ctx) -> Response:
    """The log (with the list's filters) as CSV; cells a spreadsheet would run are neutralised."""
    from ..report.numbers import csv_safe_frame
    try:
        f, since = _filters(ctx)
        with ctx.site.log() as log:
            frame = log.frame(since_utc=since, tank=f["tank"] or None)
            log.audit(ctx.who, ctx.address, "export", f"{len(frame)} entries")
    except DosingError as err:
        return ctx.render("error.html", 422, title="Export refused", message=str(err))
    if f["operator"]:
        frame = frame[frame["operator"] == f["operator"]]
    body = csv_safe_frame(frame).to_csv(index=False, quoting=csv.QUOTE_NONNUMERIC)
    stamp = datetime.now().strftime("%Y%m%d-%H%M")
    return Response(body.encode("utf-8"), media_type="text/csv; charset=utf-8", headers={
        "Content-Disposition": f'attachment; filename="shift-log-{stamp}.csv"',
        "Cache-Control": "no-store"})


def audit_page(ctx: Ctx) -> Response:
    with ctx.site.log() as log:
        rows = log.audit_rows(300)
    return ctx.render("audit.html", title="Audit", rows=rows)


def edit_scenario(ctx: Ctx) -> Response:
    """An engineer edits a scenario's file; it is saved only if it reads as a
    scenario, and the text it replaces is kept in the audit."""
    name = ctx.request.path_params["name"]
    if ctx.site.path_of(name) is None:
        return ctx.render("error.html", 404, title="No such scenario",
                          message="This site's folder has no scenario of that name.")
    message, status = "", 200
    text = ctx.site.text_of(name)
    if ctx.request.method == "POST":
        text = ctx.form.get("text", "").replace("\r\n", "\n")
        try:
            old = ctx.site.save_scenario(name, text)
            with ctx.site.log() as log:
                log.audit(ctx.who, ctx.address, "scenario_saved",
                          f"{name}.toml; the text it replaced:\n{old}")
            message = "Saved."
        except DosingError as err:
            message, status = f"Not saved: {err}", 422
    return ctx.render("edit.html", status, title=f"Edit {name}", name=name, text=text,
                      message=message)
