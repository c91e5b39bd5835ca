"""The explorer as a Dash application: layout, callbacks, and the few locked-down Flask routes.

Pages: ``/`` the overview (one row per study), ``/study/<name>`` one study (designs, return loss, Smith
chart, scatter, tuning).  Every figure is computed in the server by our own domain and engine; the browser
only draws what plotly is given.  ``/files/<study>/<file>`` serves a file the study's summary lists (its
hashes in ``files``) and nothing else; any other path, and any path with a ``..`` part in any spelling, is a
404.  Requests naming another host than the one served are refused (a defence against DNS rebinding).
"""

from __future__ import annotations

import math
import posixpath
from collections.abc import Sequence
from pathlib import Path
from typing import Any
from urllib.parse import quote, unquote

import flask
from dash import ALL, Dash, Input, Output, State, ctx, dcc, html, no_update

from optmatch.domain.design import worst_and_each, worst_bare_load
from optmatch.errors import OptmatchError
from optmatch.explorer import sortable, tuning
from optmatch.explorer.data import DASH, Results, all_designs, best_yield, ceiling_db
from optmatch.explorer.figures import PALETTE, TUNED, Curve, return_loss_figure, scatter_figure, smith_figure
from optmatch.explorer.keep import keep_variant
from optmatch.explorer.sortable import Column
from optmatch.outputs.document import SummaryDoc
from optmatch.outputs.tables import (
    ALTERNATIVE_HEAD,
    LOADS_HEAD,
    alternative_cells,
    elements_text,
    load_margin_cells,
    load_margin_head,
    loads_rows,
    loads_sentence,
    mask_text,
    num,
    yield_text,
)

ASSETS = Path(__file__).with_name("assets")
ALLOWED_PREFIXES = ("/_dash-", "/_reload-hash", "/_favicon.ico", "/assets/", "/files/", "/study/")
OVERLAID_AT_START = 3

def _pct(y: float | None) -> str:
    return DASH if y is None else f"{100.0 * y:.0f}%"


# ---------------------------------------------------------------- pages


def overview_rows(results: Results) -> list[dict]:
    """One row per study: status, verdict, best margin, best yield, ceiling (where known)."""
    rows = []
    for e in results.entries():
        s = e.summary
        best = s.best if s is not None else None
        margin = best.margin_db if best is not None else None
        y = best_yield(s)
        ceiling = ceiling_db(s)
        n_alt = len(s.alternatives) if s is not None and s.alternatives else None
        several = s is not None and s.several_loads and best is not None
        met = best.loads_met if several and best is not None else None
        rows.append(sortable.row(
            {"study": e.name, "status": e.status if not e.message else f"{e.status}: {e.message}",
             "verdict": s.verdict if s is not None else DASH, "margin": num(margin, "+.2f", "+∞"), "yield": _pct(y),
             "ceiling": num(ceiling, ".2f"), "designs": str(len(s.designs)) if s is not None else DASH,
             "alternatives": str(n_alt) if n_alt else DASH,
             "loads": f"{met} of {len(s.loads)}" if s is not None and met is not None else DASH},
            order={"loads": met, "margin": margin if margin is None or math.isfinite(margin) else 1e9, "yield": y,
                   "ceiling": ceiling, "designs": len(s.designs) if s is not None else None, "alternatives": n_alt},
            href=f"/study/{quote(e.name, safe='')}" if s is not None else None))
    return rows


OVERVIEW_COLUMNS = [Column("study", "study"), Column("status", "status"), Column("verdict", "verdict"),
                    Column("margin", "best margin (dB)", True), Column("yield", "best yield", True),
                    Column("ceiling", "ceiling (dB)", True), Column("designs", "designs", True),
                    Column("alternatives", "alternatives", True), Column("loads", "loads met (best)", True)]


def overview(results: Results) -> html.Div:
    return html.Div([
        html.H1("Studies"),
        html.P(["Results in ", html.Code(str(results.root)), ". Click a study to open it; click a column "
                "heading to sort. Margin: worst-case dB by which the best design clears its mask (negative: it "
                "misses). Yield: share of simulated builds that still meet it. Ceiling: the Bode–Fano limit, "
                "where the study gives it."], className="sub"),
        sortable.sortable("overview", OVERVIEW_COLUMNS, overview_rows(results)),
    ])


def _design_rows(s: SummaryDoc) -> list[dict]:
    return [sortable.row({"design": label, "verdict": d.verdict, "margin": num(d.margin_db, "+.2f", "+∞"),
                          "worst": num(d.worst_return_loss_db, ".2f"), "at": f"{d.worst_freq_hz / 1e6:.2f}",
                          "length": f"{d.total_length_wl:.3f}", "yield": yield_text(d), "elements": elements_text(d)},
                         order={"margin": d.margin_db if math.isfinite(d.margin_db) else 1e9,
                                "worst": d.worst_return_loss_db if math.isfinite(d.worst_return_loss_db) else 1e9,
                                "at": d.worst_freq_hz, "length": d.total_length_wl,
                                "yield": d.robustness.yield_frac if d.robustness is not None else None,
                                "design": key},
                         key=key)
            for key, label, d in all_designs(s)]


DESIGN_COLUMNS = [Column("design", "design"), Column("verdict", "verdict"), Column("margin", "margin (dB)", True),
                  Column("worst", "worst RL (dB)", True), Column("at", "at (MHz)", True),
                  Column("length", "length (λ)", True), Column("yield", "yield", True),
                  Column("elements", "elements, load outwards (electrical length, Z0)")]
ALTERNATIVE_COLUMNS = [Column(str(k), h, k >= 4 or k == 2) for k, h in enumerate(ALTERNATIVE_HEAD)]


def _numbers(cells: Sequence[str]) -> dict[str, float]:
    """Sort values of the cells that read as numbers (``+1.23``, ``12.5``), keyed by column."""
    out = {}
    for k, c in enumerate(cells):
        try:
            out[str(k)] = float(c.replace("+∞", "inf"))
        except ValueError:
            continue
    return out


def _loads_parts(s: SummaryDoc) -> list:
    """With several loads: the loads alone and each ranked design's margin on each load."""
    if not s.several_loads:
        return []
    alone, left = loads_rows(s)
    head = load_margin_head(s)
    per = [sortable.row({str(k): c for k, c in enumerate(cells)}, order=_numbers(cells))
           for cells in (load_margin_cells(d, s) for d in s.designs)]
    return [html.H2("Each load"), html.P(loads_sentence(s) + (f" (the {len(alone)} worst alone shown; {left} more "
                                                             "in summary.json)" if left else ""), className="sub"),
            sortable.sortable("loads-alone", [Column(str(k), h, k >= 3 or k == 1) for k, h in enumerate(LOADS_HEAD)],
                              [sortable.row({str(k): c for k, c in enumerate(r)}, order=_numbers(r)) for r in alone]),
            sortable.sortable("loads-margins", [Column(str(k), h, k >= 2) for k, h in enumerate(head)], per)]


def _overlay_options(s: SummaryDoc) -> list[dict]:
    return [{"label": label, "value": key} for key, label, _ in all_designs(s)]


def study_page(results: Results, name: str) -> html.Div:
    opened = results.open(name)
    if opened is None or opened.entry.summary is None:
        return html.Div([dcc.Link("← all studies", href="/"), html.H1("No such study"),
                         html.P(f"{name!r} is not a finished study of these results.")])
    s = opened.entry.summary
    first = all_designs(s)[0][0] if s.designs else None
    parts: list = [dcc.Link("← all studies", href="/"), html.H1(s.study)]
    if s.description:
        parts.append(html.P(s.description, className="sub"))
    parts.append(html.P([html.B("Verdict: "), s.verdict_line], id="verdict"))
    parts.append(html.P(f"Mask: {mask_text(s.mask)}", className="sub"))
    if s.invented:
        parts.append(html.P("The study says its data is invented: not a measurement.", className="note"))
    if opened.study is None:
        parts.append(html.P(f"Read only (no curves or tuning): {opened.problem_text}", className="note"))
    if s.alternatives:
        alt_rows = [sortable.row({str(k): c for k, c in enumerate(alternative_cells(a))},
                                 order={"2": a.best_rank, "4": a.best_margin_db, "5": a.best_yield,
                                        "6": a.total_length_wl, "7": a.total_mm, "8": a.pieces, "9": a.junctions})
                    for a in s.alternatives]
        parts += [html.H2("Alternatives compared"),
                  html.P("Each named network was searched with the same budget; each row is its best design.",
                         className="sub"),
                  sortable.sortable("alternatives", ALTERNATIVE_COLUMNS, alt_rows)]
    parts += [
        html.H2("Designs"),
        html.P("Click a row or a point of the scatter to select a design; tick designs to overlay them.",
               className="sub"),
        sortable.sortable("designs", DESIGN_COLUMNS, _design_rows(s)),
        *_loads_parts(s),
        html.Div([html.Span("Overlay: ", className="label"),
                  dcc.Checklist(id="overlay", options=_overlay_options(s), inline=True,
                                value=[k for k, _, _ in all_designs(s)[:OVERLAID_AT_START]])], className="overlay"),
        html.Div([
            html.Div(dcc.Graph(id="rl", config={"displaylogo": False}), className="cell wide"),
            html.Div(dcc.Graph(id="smith", config={"displaylogo": False}), className="cell"),
        ], className="row"),
        html.Div([
            html.Div(dcc.Graph(id="scatter", config={"displaylogo": False}), className="cell wide"),
            html.Div([
                html.H2(["Tuning ", html.Span(first or DASH, id="selected-label")]),
                html.P("Each piece in mm of its cable (connector to connector); drag, use the arrow keys, or "
                       "type a value. The figures are our engine's, computed in the server.", className="sub"),
                html.Div(id="controls"),
                html.Table([html.Tbody([
                    html.Tr([html.Th("margin"), html.Td(DASH, id="tune-margin")]),
                    html.Tr([html.Th("worst return loss"), html.Td(DASH, id="tune-worst")]),
                    html.Tr([html.Th("yield"), html.Td(DASH, id="tune-yield")]),
                    html.Tr([html.Th("total length"), html.Td(DASH, id="tune-length")]),
                ])], className="readout"),
                html.Button("keep this variant", id="keep", n_clicks=0, disabled=opened.study is None),
                html.Span("", id="keep-status", className="sub"),
            ], className="cell tuning"),
        ], className="row"),
        html.H2("Files"),
        html.Ul([html.Li(html.A(f, href=f"/files/{quote(s.study if results.single else name)}/{quote(f)}"))
                 for f in sorted(s.files)] or [html.Li("none")], id="files"),
        dcc.Store(id="study-name", data=name), dcc.Store(id="selected", data=first), dcc.Store(id="kept", data=0),
    ]
    return html.Div(parts)


def shown_value(c: tuning.Control) -> float:
    """A control's value as its slider starts (to 0.1 mm or Ω); a slider still there has not been moved."""
    return round(c.value, 1)


def moved_values(problem, design, key: str, ids: list[dict], values: list) -> dict[str, float]:  # noqa: ANN001
    """The controls of design ``key`` the user moved (key → mm or Ω); sliders still at their starting value
    leave the design's own value exact."""
    start = {c.key: shown_value(c) for c in tuning.controls(problem, design) if c.free}
    return {i["key"]: float(v) for i, v in zip(ids, values, strict=False)
            if i.get("design") == key and i.get("key") in start and isinstance(v, (int, float))
            and not isinstance(v, bool) and math.isfinite(v) and abs(float(v) - start[i["key"]]) > 1e-9}


def _control_row(c: tuning.Control, key: str) -> html.Div:
    head = html.Span(f"{c.label} ({c.unit})", className="label")
    data: dict[str, Any] = {"data-key": c.key}  # a data-* attribute, which only a keyword mapping can name
    if not c.free:
        return html.Div([head, html.Span(f"{c.value:.1f} {c.unit}, {c.why}", className="sub")], className="control")
    return html.Div([head, dcc.Slider(id={"type": "tune", "key": c.key, "design": key}, min=round(c.lo, 3),
                                      max=round(c.hi, 3), step=c.step, value=shown_value(c),
                                      allow_direct_input=True, marks=None, updatemode="mouseup")],
                    className="control", **data)


# ---------------------------------------------------------------- the application


def create_app(root: Path, allowed_hosts: set[str] | None = None) -> Dash:
    """The explorer over ``root`` (a study's results folder or a batch's results root).

    ``allowed_hosts``: the ``Host`` header values to answer (None: any; the server sets them once bound).
    """
    results = Results(root)
    app = Dash(__name__, title="optmatch explorer", update_title="", assets_folder=str(ASSETS),
               suppress_callback_exceptions=True, serve_locally=True)
    server = app.server
    server.config["explorer_hosts"] = allowed_hosts

    @server.before_request
    def guard() -> flask.Response | None:
        hosts = server.config.get("explorer_hosts")
        if hosts is not None and flask.request.host not in hosts:
            flask.abort(404)
        raw = flask.request.environ.get("RAW_URI") or flask.request.environ.get("REQUEST_URI") or ""
        path = flask.request.path
        for text in (path, unquote(raw.split("?", 1)[0]), unquote(unquote(raw.split("?", 1)[0]))):
            parts = text.replace("\\", "/").split("/")
            if any(p in ("..", ".") for p in parts) or "\x00" in text:
                flask.abort(404)
        if path != "/" and not path.startswith(ALLOWED_PREFIXES):
            flask.abort(404)
        return None

    @server.route("/files/<study>/<path:name>")
    def study_file(study: str, name: str) -> flask.Response:
        entry = results.entry(study)
        if entry is None or entry.summary is None or entry.folder is None:
            flask.abort(404)
        if name not in entry.summary.files or posixpath.normpath(name) != name or name.startswith("/"):
            flask.abort(404)
        folder = entry.folder.resolve()
        target = (folder / name).resolve()
        if folder not in target.parents or not target.is_file():
            flask.abort(404)
        return flask.send_file(target, as_attachment=True, download_name=target.name)

    app.layout = html.Div([
        dcc.Location(id="url", refresh="callback-nav"),
        html.Header([html.Span("optmatch explorer", className="brand"),
                     html.Span(str(results.root), className="root")]),
        html.Main(id="page"),
        html.Footer("Design aids only: open stub ends carry high RF voltage at transmit power. Defer to local "
                    "regulations, the makers' ratings and licensed practice."),
    ])

    sortable.register(app)

    @app.callback(Output("page", "children"), Input("url", "pathname"))
    def render(pathname: str | None):  # noqa: ANN202 - Dash component
        path = pathname or "/"
        if path.startswith("/study/"):
            return study_page(results, unquote(path[len("/study/"):]))
        return overview(results)

    @app.callback(Output("selected", "data"), Input("scatter", "clickData"),
                  Input({"type": "pick", "table": "designs", "key": ALL}, "n_clicks"), prevent_initial_call=True)
    def select(click: dict | None, _rows: list):  # noqa: ANN202
        trig = ctx.triggered_id
        if trig == "scatter" and click and click.get("points"):
            key = click["points"][0].get("customdata")
            return key if isinstance(key, str) else no_update
        if isinstance(trig, dict) and trig.get("type") == "pick" and ctx.triggered and ctx.triggered[0].get("value"):
            return str(trig.get("key"))
        return no_update

    @app.callback(Output("controls", "children"), Output("selected-label", "children"),
                  Input("selected", "data"), State("study-name", "data"))
    def show_controls(key: str | None, name: str):  # noqa: ANN202
        opened = results.open(name) if name else None
        got = results.design(opened, key) if opened is not None and key else None
        if got is None or key is None:
            return html.P("Select a design to tune it.", className="sub"), key or DASH
        sub, design, doc = got
        label = key + (f" ({doc.alternative})" if doc.alternative else "")
        return [_control_row(c, key) for c in tuning.controls(sub.problem, design)], label

    @app.callback(Output("rl", "figure"), Output("smith", "figure"), Output("tune-margin", "children"),
                  Output("tune-worst", "children"), Output("tune-yield", "children"),
                  Output("tune-length", "children"),
                  Input("selected", "data"), Input("overlay", "value"),
                  Input({"type": "tune", "key": ALL, "design": ALL}, "value"), Input("kept", "data"),
                  State({"type": "tune", "key": ALL, "design": ALL}, "id"), State("study-name", "data"))
    def draw(key: str | None, overlay: list[str] | None, values: list, _kept: int, ids: list[dict], name: str):  # noqa: ANN202
        opened = results.open(name)
        if opened is None or opened.study is None or opened.entry.summary is None:
            empty = return_loss_figure(opened.entry.summary.mask if opened and opened.entry.summary else (), [])
            return empty, smith_figure([], 50.0), DASH, DASH, DASH, DASH
        s = opened.entry.summary
        alone = worst_bare_load(opened.study.problem)
        curves = [Curve("load alone", alone.freq, alone.gamma, "#777777", "dash", 1.2)]
        for k, ov in enumerate(overlay or []):
            got = results.design(opened, ov)
            if got is None or ov == key:
                continue
            sub, design, _ = got
            perf, _ = worst_and_each(sub.problem, design)
            curves.append(Curve(ov, perf.freq, perf.gamma, PALETTE[k % len(PALETTE)], "solid", 1.3))
        readout = (DASH, DASH, DASH, DASH)
        got = results.design(opened, key) if key else None
        if got is not None and key is not None:
            sub, design, _ = got
            moved = moved_values(sub.problem, design, key, ids, values)
            tuned = tuning.evaluate(sub.problem, tuning.tuned(sub.problem, design, moved), s.tolerance)
            perf = tuned.performance
            changed = any(abs(a - b) > 1e-12 for a, b in zip(tuned.design.u, design.u, strict=True))
            label = f"{key} tuned" if changed else key
            names = sub.problem.names if tuned.each else ()
            for name, pf in zip(names, tuned.each, strict=True):  # several loads: each one's curve, thin
                if pf is not perf:
                    curves.append(Curve(f"{label} on {name}", pf.freq, pf.gamma, TUNED, "dot", 1.2))
            worst = next((n for n, pf in zip(names, tuned.each, strict=True) if pf is perf), "")
            on = f" on {worst}, the worst" if worst else ""
            curves.append(Curve(label + on, perf.freq, perf.gamma, TUNED, "solid", 2.4))
            worst_mhz = perf.freq[perf.worst_index] / 1e6
            readout = (f"{perf.margin_db:+.2f} dB", f"{perf.worst_rl_db:.2f} dB at {worst_mhz:.3f} MHz",
                       _pct(tuned.robustness.yield_frac) + f" of {tuned.robustness.samples} builds",
                       f"{tuned.design.length_wl:.3f} λ")
        return (return_loss_figure(s.mask, curves), smith_figure(curves, s.system_ohm), *readout)

    @app.callback(Output("scatter", "figure"), Input("selected", "data"), Input("kept", "data"),
                  State("study-name", "data"))
    def scatter(key: str | None, _kept: int, name: str):  # noqa: ANN202
        opened = results.open(name)
        if opened is None or opened.entry.summary is None:
            return no_update
        return scatter_figure(opened.entry.summary, key)

    @app.callback(Output("keep-status", "children"), Output("kept", "data"),
                  Output({"type": "rows", "table": "designs"}, "data"), Output("overlay", "options"),
                  Input("keep", "n_clicks"), State("selected", "data"),
                  State({"type": "tune", "key": ALL, "design": ALL}, "value"),
                  State({"type": "tune", "key": ALL, "design": ALL}, "id"), State("study-name", "data"),
                  State("kept", "data"), prevent_initial_call=True)
    def keep(n: int, key: str | None, values: list, ids: list[dict], name: str, kept: int):  # noqa: ANN202
        opened = results.open(name)
        got = results.design(opened, key) if opened is not None and key else None
        if not n or got is None or key is None or opened is None or opened.entry.folder is None:
            return "select a design first", no_update, no_update, no_update
        sub, design, doc = got
        moved = moved_values(sub.problem, design, key, ids, values)
        based_on = doc.rank
        try:
            variant = keep_variant(opened.entry.folder, sub, tuning.tuned(sub.problem, design, moved), based_on,
                                   doc.alternative)
        except OptmatchError as exc:
            return f"not kept: {exc}", no_update, no_update, no_update
        fresh = results.open(name)
        s = fresh.entry.summary if fresh is not None and fresh.entry.summary is not None else opened.entry.summary
        assert s is not None
        return (f"kept as {variant.name} ({', '.join(variant.files)}); summary.json lists it",
                (kept or 0) + 1,
                {"table": "designs",
                 "columns": [{"key": c.key, "heading": c.heading, "numeric": c.numeric} for c in DESIGN_COLUMNS],
                 "rows": _design_rows(s)},
                _overlay_options(s))

    return app


__all__ = ["create_app", "overview_rows"]
