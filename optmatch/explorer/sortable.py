"""Plain HTML tables that sort by a click on a column heading, built from Dash's html components.

Each table keeps its rows in a ``dcc.Store`` (``{"type": "rows", "table": ID}``); a click on a heading
re-renders the body in that column's order (a second click reverses it).  A row may link to a page
(``href``: its first cell is the link) or be pickable (``key``: the row is clickable, with id
``{"type": "pick", "table": ID, "key": KEY}``).  Cells have the class ``c-<column>``.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

from dash import ALL, MATCH, Dash, Input, Output, State, ctx, dcc, html


@dataclass(frozen=True)
class Column:
    key: str
    heading: str
    numeric: bool = False


def row(cells: dict[str, str], order: dict[str, Any] | None = None, href: str | None = None,
        key: str | None = None) -> dict:
    """One row: the text of each cell, the value each column sorts by (default the text), a link or a key."""
    return {"cells": cells, "order": order or {}, "href": href, "key": key}


def _body(table: str, columns: Sequence[dict], rows: Sequence[dict]) -> list:
    out = []
    for r in rows:
        tds = []
        for k, c in enumerate(columns):
            text = r["cells"].get(c["key"], "")
            content = dcc.Link(text, href=r["href"]) if k == 0 and r.get("href") else text
            tds.append(html.Td(content, className=f"c-{c['key']}" + (" num" if c["numeric"] else "")))
        if r.get("key") is not None:
            out.append(html.Tr(tds, id={"type": "pick", "table": table, "key": r["key"]}, n_clicks=0,
                               className="pickable", title="click to select"))
        else:
            out.append(html.Tr(tds))
    return out


def _sorted(rows: Sequence[dict], order: list | None) -> list[dict]:
    if not order:
        return list(rows)
    col, descending = order

    def value(r: dict) -> tuple:
        v = r["order"].get(col, r["cells"].get(col))
        if v is None:
            return (1, 0, "")  # blanks last, whatever the direction
        return (0, v, "") if isinstance(v, (int, float)) else (0, 0, str(v).lower())

    present = [r for r in rows if value(r)[0] == 0]
    blank = [r for r in rows if value(r)[0] == 1]
    return sorted(present, key=value, reverse=bool(descending)) + blank


def sortable(table: str, columns: Sequence[Column], rows: Sequence[dict]) -> html.Div:
    """A sortable table with id ``table``."""
    cols = [{"key": c.key, "heading": c.heading, "numeric": c.numeric} for c in columns]
    head = html.Tr([html.Th(html.Button(c.heading, id={"type": "sort", "table": table, "col": c.key}, n_clicks=0,
                                        className="sort", title="sort by this column"),
                            className="num" if c.numeric else "") for c in columns])
    return html.Div([
        dcc.Store(id={"type": "rows", "table": table}, data={"table": table, "columns": cols, "rows": list(rows)}),
        dcc.Store(id={"type": "order", "table": table}, data=None),
        html.Table([html.Thead(head), html.Tbody(_body(table, cols, rows), id={"type": "body", "table": table})],
                   id=table, className="grid"),
    ], className="grid-wrap")


def register(app: Dash) -> None:
    """The one callback that sorts every sortable table."""

    @app.callback(Output({"type": "body", "table": MATCH}, "children"),
                  Output({"type": "order", "table": MATCH}, "data"),
                  Input({"type": "sort", "table": MATCH, "col": ALL}, "n_clicks"),
                  Input({"type": "rows", "table": MATCH}, "data"), State({"type": "order", "table": MATCH}, "data"),
                  prevent_initial_call=True)
    def resort(_clicks: list, data: dict, order: list | None):  # noqa: ANN202 - Dash components
        trig = ctx.triggered_id
        if isinstance(trig, dict) and trig.get("type") == "sort":
            col = trig.get("col")
            numeric = {c["key"]: c["numeric"] for c in data["columns"]}
            if col in numeric:  # a new column: numbers largest first, text A to Z; the same column: reversed
                order = [col, not order[1]] if order and order[0] == col else [col, numeric[col]]
        return _body(data["table"], data["columns"], _sorted(data["rows"], order)), order


__all__ = ["Column", "register", "row", "sortable"]
