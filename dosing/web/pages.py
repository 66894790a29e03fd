"""The site's pages for planning: the tanks, the scenarios, a plan, its print
view and PDF, and recording the decision.

Each handler takes a :class:`~dosing.web.auth.Ctx` and returns a response;
the chemistry and the words come from the planning and report layers, as
for the command line and Tankside.
"""

from __future__ import annotations

import base64
from datetime import datetime
from typing import Any

from starlette.responses import RedirectResponse, Response

from ..errors import DosingError, InputError
from ..planning.reagents import GENERAL_CAUTION
from .auth import Ctx
from .site import FORM_FIELDS, PAIR_FIELDS, Planned, amount_field, scenario_form

__all__ = ["tanks", "scenarios", "plan_page", "print_page", "pdf_download", "record",
           "record_planned", "kg_unit"]

_UNITS = ("metric", "us")


def kg_unit(entry) -> str:
    """What an entry's kilograms are: kg per batch, kg/h for a flow."""
    from ..io.shiftlog import kg_basis
    return "kg/h" if kg_basis(entry) == "kg per hour" else "kg"


def _now() -> str:
    return datetime.now().strftime("%Y-%m-%d %H:%M")


def tanks(ctx: Ctx) -> Response:
    """Each tank with its latest decision, the pH after it and (for an engineer) the bias."""
    from ..report.words import bias_words
    rows = []
    with ctx.site.log() as log:
        latest = {}                       # tank -> its last decision or correction
        for e in log.entries():
            if e.tank and e.kind != "follow_up":
                latest[e.tank] = e
        for tank in sorted(latest):
            last = latest[tank]
            bias = log.bias(tank) if ctx.can("bias") else None
            rows.append({"tank": tank, "entry": last, "ph_after": log.latest_ph(last),
                         "bias": bias_words(bias) if bias else "", "unit": kg_unit(last)})
    return ctx.render("tanks.html", title="Tanks", rows=rows)


def scenarios(ctx: Ctx) -> Response:
    from ..io.scenario import parse_toml
    items = []
    for name, path in ctx.site.scenarios().items():
        try:
            data = parse_toml(path.read_text(encoding="utf-8"), path.name)
            items.append({"name": name, "title": data.get("title", name),
                          "tank": data.get("tank", ""), "site": data.get("site", ""),
                          "kind": "flow" if "flow" in data else "train" if data.get("step")
                          else "batch"})
        except (DosingError, OSError, UnicodeDecodeError) as err:
            items.append({"name": name, "title": name, "tank": "", "site": "",
                          "kind": "", "error": str(err)})
    return ctx.render("scenarios.html", title="Plan a tank", items=items)


def _units(ctx: Ctx) -> str:
    u = ctx.request.query_params.get("units") or ctx.form.get("units") or "metric"
    return u if u in _UNITS else "metric"


def _planned(ctx: Ctx, values: dict[str, str] | None) -> tuple[Planned | None, str]:
    """The plan for the page's scenario and boxes, or (None, one-line error)."""
    name = ctx.request.path_params["name"]
    try:
        return ctx.site.plan(name, values), ""
    except DosingError as err:
        return None, str(err)


def _boxes(ctx: Ctx, source: dict[str, str]) -> dict[str, str]:
    names = [n for n, *_ in FORM_FIELDS + PAIR_FIELDS] + ["amount"]
    return {n: source.get(n, "") for n in names}


def _sheet_values(p: Planned, units: str, site) -> dict[str, Any]:
    """What the sheet part of the page shows, from the report layer."""
    from ..report import sheet
    from ..report.view import plan_view
    from ..report.words import texts
    out: dict[str, Any] = {"train": None, "view": None}
    if p.train is not None:
        out["train"] = _train_values(p, units)
    if p.plan is not None:
        v = plan_view(p.scenario, p.plan)
        out.update(view=v, headline=sheet.headline(v, units),
                   breaches=texts(v.breaches, units), dose=sheet.dose_lines(v, units),
                   control=sheet.control_lines(v, units),
                   staging=sheet.staging_words(v, units),
                   trim=sheet.trim_rows(v, units), metals=sheet.metal_lines(v, units),
                   water=sheet.water_rows(v, units),
                   checks=sheet.check_lines(v, units),
                   warnings=texts(v.warnings, units), cautions=p.plan.cautions)
    out["figure"] = _figure(p, units, site)
    return out


def _train_values(p: Planned, units: str) -> dict[str, Any]:
    """A train's sheet as the page shows it: the same parts as the text sheet."""
    from ..report import train_sheet as ts
    from ..report.train_view import train_view
    from ..report.words import words
    v = train_view(p.scenario, p.train)
    return {"proposed": p.train.proposed,
            "headlines": [ts.step_headline(v, s, units) for s in v.steps],
            "discharge": ts.discharge_line(v),
            "top": [words(w, units) for w in v.warnings if ts.is_headline_warning(w)],
            "steps": [(ts.step_headline(v, s, units), ts.step_rows(v, s, units),
                       [words(w, units) for w in s.warnings]) for s in v.steps],
            "totals": ts.total_rows(v, units),
            "checks": [(c.level, words(c, units)) for c in v.checks],
            "rest": [words(w, units) for w in v.warnings if not ts.is_headline_warning(w)],
            "cautions": list(p.train.cautions)}


def _figure(p: Planned, units: str, site) -> str:
    """The plan's figure as a data: URL (PNG), cautions under it."""
    from ..report.plot import plan_figure_png, train_figure_png
    from ..report.sheet import figure_title
    title = figure_title(p.scenario, _now())
    with site.figure_lock:
        png = (train_figure_png(p.train, title, units) if p.train is not None else
               plan_figure_png(p.plan, title, units,
                               window="permit window" if p.scenario.permit else
                               "target window"))
    return "data:image/png;base64," + base64.b64encode(png).decode("ascii")


def plan_page(ctx: Ctx) -> Response:
    """The form with today's measurements and, once sent, the dose sheet."""
    name = ctx.request.path_params["name"]
    if ctx.site.path_of(name) is None:
        return ctx.render("error.html", 404, title="No such scenario",
                          message="This site's folder has no scenario of that name.")
    query = dict(ctx.request.query_params)
    from ..io.scenario import parse_toml
    try:
        data = parse_toml(ctx.site.text_of(name), f"{name}.toml")
    except DosingError as err:
        return ctx.render("error.html", 422, title="Scenario unreadable", message=str(err))
    values = _boxes(ctx, query) if "go" in query else scenario_form(data)
    units = _units(ctx)
    planned, error = _planned(ctx, values if "go" in query else None)
    sheet = _sheet_values(planned, units, ctx.site) if planned else {}
    from urllib.parse import urlencode
    query_text = urlencode({**values, "units": units, "go": "1"})
    return ctx.render("plan.html", 422 if error else 200, title=f"Plan {name}", name=name,
                      values=values, fields=FORM_FIELDS, pairs=PAIR_FIELDS, units=units,
                      amount=amount_field(data)[1:], error=error, planned=planned,
                      query=query_text, final_word=GENERAL_CAUTION, **sheet)


def _print_sheet(ctx: Ctx):
    from ..report.print_sheet import print_sheet
    query = dict(ctx.request.query_params)
    planned, error = _planned(ctx, _boxes(ctx, query) if "go" in query else None)
    if planned is None:
        return None, error
    return print_sheet(planned.scenario, planned.plan, planned.train, _units(ctx),
                       _now()), ""


def print_page(ctx: Ctx) -> Response:
    """The one-page sheet as a page to print from the browser."""
    sheet, error = _print_sheet(ctx)
    if sheet is None:
        return ctx.render("error.html", 422, title="Cannot plan", message=error)
    return ctx.render("print.html", title=f"Print: {sheet.title}", sheet=sheet,
                      site_name=ctx.site.name)


def pdf_download(ctx: Ctx) -> Response:
    """The one-page sheet as a PDF download."""
    from ..report.print_pdf import print_pdf
    sheet, error = _print_sheet(ctx)
    if sheet is None:
        return ctx.render("error.html", 422, title="Cannot plan", message=error)
    paper = ctx.request.query_params.get("paper", "a4")
    try:
        pdf = print_pdf(sheet, paper if paper in ("a4", "letter") else "a4")
    except InputError as err:
        return ctx.render("error.html", 422, title="Cannot print", message=str(err))
    name = ctx.request.path_params["name"]
    return Response(pdf, media_type="application/pdf", headers={
        "Content-Disposition": f'attachment; filename="{name}-sheet.pdf"',
        "Cache-Control": "no-store"})


def _given(ctx: Ctx, planned: Planned) -> tuple[list[float] | None, float | None]:
    """What was given (kg, or litres turned to kg) and the pH after, from the form."""
    from ..io.typed import read_number
    from ..report.record import litres_to_kg
    figures = []
    for key in ("dosed", "dosed_l"):
        text = ctx.form.get(key, "").strip()
        if text:
            try:
                figures = [read_number(t) for t in text.replace(";", " ").split()]
            except ValueError:
                raise InputError(key, f"{text!r}: give numbers (one per dose step, "
                                 "separated by spaces)") from None
            if any(not 0 <= f <= 1e9 for f in figures):
                raise InputError(key, f"{text!r}; allowed: 0 to 1e9")
            if key == "dosed_l":
                figures = litres_to_kg(planned.scenario, planned.plan, planned.train, figures)
            break
    ph = ctx.form.get("ph_after", "").strip()
    try:
        ph_after = read_number(ph) if ph else None
    except ValueError:
        raise InputError("ph_after", f"{ph!r} is not a pH; allowed: 0 to 14") from None
    return (figures or None), ph_after


def record(ctx: Ctx) -> Response:
    """Record the decision planned with the form's boxes (planned again here,
    so the record is the plan the server made, not what a page claims)."""
    planned, error = _planned(ctx, _boxes(ctx, ctx.form))
    if planned is None:
        return ctx.render("error.html", 422, title="Not recorded", message=error)
    try:
        entry_id = record_planned(ctx, planned)
    except DosingError as err:
        return ctx.render("error.html", 422, title="Not recorded", message=str(err))
    return RedirectResponse(f"/log/{entry_id}", 303)


def record_planned(ctx: Ctx, planned: Planned, corrects: int | None = None) -> int:
    """Record ``planned`` with what the form says was given, by the one signed
    in (a correction of entry ``corrects`` if given); returns the new id."""
    from ..report.record import record_of
    given, ph_after = _given(ctx, planned)
    data, dosed = record_of(planned.scenario, planned.plan, planned.train, given)
    with ctx.site.log() as log:
        entry_id = log.record_decision(
            operator=ctx.who, scenario_toml=planned.toml, plan=data, dosed_kg=dosed,
            ph_after=ph_after, note=ctx.form.get("note", "")[:2000], corrects=corrects)
        log.audit(ctx.who, ctx.address, "correction" if corrects else "record",
                  f"entry {entry_id}" + (f" corrects {corrects}" if corrects else ""))
    return entry_id
