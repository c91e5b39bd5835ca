"""The batch report over a results root: ``report.html`` and its markdown twin ``report.md``, plus one
page per study (``<study>/study.html`` and ``<study>/study.md``) with its plots and cut list.

Self-contained and static: inline CSS, no script, plots referenced by relative paths inside the
results root, so the folder can be copied or opened without any network.  Reads only JSON files:
``batch.json`` (state of each study of the last batch, if any) and ``<study>/summary.json``.
"""

from __future__ import annotations

import html
import json
import math
import time
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from optmatch.io.atomic import write_text_atomic

REPORT_HTML = "report.html"
REPORT_MD = "report.md"
STUDY_HTML = "study.html"
STUDY_MD = "study.md"
STATE_NAME = "batch.json"
PLOTS = (("return_loss.png", "Return loss across the band"), ("smith.png", "Smith chart"),
         ("pareto.png", "Margin against total length"))
DASH = "–"

CAUTIONS = (
    "Open stub ends and mismatched lines carry high RF voltage at transmit power: do not touch "
    "a stub or line while the transmitter can key.",
    "RF burns happen without warning; observe the exposure limits that apply where you work.",
    "Cable power and voltage ratings fall as frequency and mismatch rise; check them for your cable.",
    "These figures are design aids. Defer to local regulations, the equipment makers' ratings and "
    "licensed practice; measure the finished network before use.",
)

CSS = """
:root { --ink:#1d2430; --muted:#5d6878; --line:#d9dee6; --band:#f4f6f9; --accent:#245c8f;
        --pass:#1f7a3f; --pass-bg:#e3f3e8; --fail:#a12a2a; --fail-bg:#f8e3e3; --warn:#8a5a00; --warn-bg:#fbf0d9; }
* { box-sizing: border-box; }
body { margin: 0; font: 15px/1.5 system-ui, -apple-system, "Segoe UI", Roboto, "DejaVu Sans", sans-serif;
       color: var(--ink); background: #fff; }
main { max-width: 1180px; margin: 0 auto; padding: 28px 32px 48px; }
h1 { font-size: 26px; margin: 0 0 4px; } h2 { font-size: 19px; margin: 32px 0 10px; }
p.sub { color: var(--muted); margin: 0 0 20px; }
a { color: var(--accent); text-decoration: none; } a:hover { text-decoration: underline; }
.tiles { display: flex; gap: 12px; flex-wrap: wrap; margin: 0 0 24px; }
.tile { border: 1px solid var(--line); border-radius: 8px; padding: 10px 16px; min-width: 120px; background: var(--band); }
.tile b { display: block; font-size: 24px; } .tile span { color: var(--muted); font-size: 13px; }
table { border-collapse: collapse; width: 100%; font-variant-numeric: tabular-nums; }
th, td { padding: 8px 10px; border-bottom: 1px solid var(--line); text-align: left; vertical-align: top; }
th { font-size: 13px; color: var(--muted); font-weight: 600; background: var(--band); white-space: nowrap; }
td.num, th.num { text-align: right; white-space: nowrap; }
tbody tr:hover { background: #fafbfd; }
.chip { display: inline-block; padding: 1px 9px; border-radius: 999px; font-size: 13px; font-weight: 600;
        white-space: nowrap; }
.chip.pass { color: var(--pass); background: var(--pass-bg); } .chip.fail { color: var(--fail); background: var(--fail-bg); }
.chip.done { color: var(--ink); background: var(--band); border: 1px solid var(--line); }
.chip.error, .chip.interrupted { color: var(--fail); background: var(--fail-bg); }
.chip.running, .chip.pending { color: var(--warn); background: var(--warn-bg); }
.msg { color: var(--fail); font-size: 13px; word-break: break-word; }
.plots { display: grid; grid-template-columns: 1fr; gap: 16px; max-width: 980px; }
figure { margin: 0; border: 1px solid var(--line); border-radius: 8px; padding: 10px; background: #fff; }
figure img { width: 100%; height: auto; display: block; } figcaption { color: var(--muted); font-size: 13px; }
dl.facts { display: grid; grid-template-columns: max-content 1fr; gap: 4px 18px; margin: 0; }
dl.facts dt { color: var(--muted); } dl.facts dd { margin: 0; font-variant-numeric: tabular-nums; }
.caution { border-left: 4px solid var(--warn); background: var(--warn-bg); padding: 10px 16px; border-radius: 4px; }
.caution ul { margin: 6px 0 0; padding-left: 20px; }
footer { color: var(--muted); font-size: 12px; margin-top: 36px; }
"""


@dataclass(frozen=True)
class Row:
    """One study in the report."""

    name: str
    status: str
    message: str
    summary: Mapping | None
    file: str


# ---------------------------------------------------------------- reading


def _read_json(path: Path) -> Any:
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None


def collect_rows(root: Path) -> list[Row]:
    """Studies of the last batch (in its order) and any other results folder under ``root``."""
    root = Path(root)
    state = _read_json(root / STATE_NAME) or {}
    rows: list[Row] = []
    seen: set[str] = set()
    for s in state.get("studies", []) if isinstance(state, dict) else []:
        name = str(s.get("name", "?"))
        summary = _read_json(root / name / "summary.json") if s.get("status") != "error" else None
        rows.append(Row(name, str(s.get("status", "?")), str(s.get("message") or ""), summary,
                        str(s.get("file", ""))))
        seen.add(name)
    for path in sorted(root.glob("*/summary.json")):
        name = path.parent.name
        if name in seen:
            continue
        summary = _read_json(path)
        rows.append(Row(name, "done" if summary else "error",
                        "" if summary else f"{path}: unreadable", summary,
                        str(summary.get("file", "")) if summary else ""))
    return rows


# ---------------------------------------------------------------- figures


def _best(summary: Mapping | None) -> Mapping | None:
    designs = (summary or {}).get("designs") or []
    return designs[0] if designs else None


def cut_list_pieces(summary: Mapping | None) -> list | None:
    """The cut list's pieces, or None when the summary has no cut list."""
    cut = (summary or {}).get("cut_list")
    if cut is None:
        return None
    if isinstance(cut, Mapping):
        cut = cut.get("pieces", [])
    return list(cut) if isinstance(cut, Sequence) and not isinstance(cut, str) else None


def _length_text(summary: Mapping | None) -> str:
    best = _best(summary)
    if best is None:
        return DASH
    wl = best.get("total_length_wl")
    metres = [e.get("physical_m") for e in best.get("elements", []) if e.get("kind") != "lumped"]
    text = f"{wl:.3f} λ" if isinstance(wl, (int, float)) else DASH
    if metres and all(isinstance(m, (int, float)) for m in metres):
        text += f" · {sum(metres):.3f} m"
    return text


def _num(value: Any, fmt: str) -> str:
    if not isinstance(value, (int, float)) or (isinstance(value, float) and not math.isfinite(value)):
        return DASH
    return format(value, fmt)


def _verdict(row: Row) -> str | None:
    if row.summary is None:
        return None
    return str(row.summary.get("verdict")) if row.summary.get("verdict") else None


def _cells(row: Row) -> dict[str, str]:
    """Plain-text cells of one row, shared by the HTML and markdown tables."""
    s = row.summary
    pieces = cut_list_pieces(s)
    search = (s or {}).get("search", {})
    return {
        "status": row.status,
        "verdict": _verdict(row) or DASH,
        "margin": _num((s or {}).get("best_margin_db"), "+.2f"),
        "length": _length_text(s),
        "cut": str(len(pieces)) if pieces is not None else DASH,
        "trials": _num(search.get("trials_complete"), "d"),
        "time": _num(search.get("elapsed_s"), ".0f"),
    }


COLUMNS = (("study", "Study", False), ("status", "Status", False), ("verdict", "Mask", False),
           ("margin", "Best margin (dB)", True), ("length", "Total length", True),
           ("cut", "Cut-list pieces", True), ("trials", "Trials", True), ("time", "Time (s)", True))


# ---------------------------------------------------------------- HTML


def _e(value: Any) -> str:
    return html.escape(str(value), quote=True)


def _page(title: str, body: str) -> str:
    return (f'<!DOCTYPE html>\n<html lang="en">\n<head>\n<meta charset="utf-8">\n'
            f'<meta name="viewport" content="width=device-width, initial-scale=1">\n<title>{_e(title)}</title>\n'
            f"<style>{CSS}</style>\n</head>\n<body>\n<main>\n{body}\n</main>\n</body>\n</html>\n")


def _chip(text: str, kind: str) -> str:
    return f'<span class="chip {_e(kind)}">{_e(text)}</span>'


def _cautions_html() -> str:
    items = "".join(f"<li>{_e(c)}</li>" for c in CAUTIONS)
    return f'<section class="caution"><strong>Safety</strong><ul>{items}</ul></section>'


def _tiles(rows: list[Row]) -> str:
    n_pass = sum(_verdict(r) == "PASS" for r in rows)
    n_fail = sum(_verdict(r) == "FAIL" for r in rows)
    n_err = sum(r.status in ("error", "interrupted") for r in rows)
    n_open = sum(r.status in ("pending", "running") for r in rows)
    tiles = [(len(rows), "studies"), (n_pass, "meet their mask"), (n_fail, "miss their mask"),
             (n_err, "errors"), (n_open, "not finished")]
    return '<div class="tiles">' + "".join(f'<div class="tile"><b>{n}</b><span>{_e(t)}</span></div>'
                                          for n, t in tiles) + "</div>"


def batch_html(rows: list[Row], generated: str) -> str:
    """The batch report page."""
    head = "".join(f'<th class="{"num" if num else ""}">{_e(label)}</th>' for _, label, num in COLUMNS)
    body_rows = []
    for r in rows:
        c = _cells(r)
        link = f'<a href="{_e(r.name)}/{STUDY_HTML}">{_e(r.name)}</a>' if r.summary else _e(r.name)
        first = link + (f'<div class="msg">{_e(r.message)}</div>' if r.message and r.status != "done" else "")
        verdict = _chip(c["verdict"], c["verdict"].lower()) if c["verdict"] != DASH else DASH
        cells = [first, _chip(c["status"], c["status"]), verdict] + [c[k] for k in
                                                                    ("margin", "length", "cut", "trials", "time")]
        tds = "".join(f'<td class="{"num" if num else ""}">{cell}</td>'
                      for cell, (_, _, num) in zip(cells, COLUMNS, strict=True))
        body_rows.append(f'<tr class="study" data-study="{_e(r.name)}">{tds}</tr>')
    table = (f'<table id="studies"><thead><tr>{head}</tr></thead><tbody>\n' + "\n".join(body_rows)
             + "\n</tbody></table>")
    body = (f"<h1>Batch report</h1>\n<p class=\"sub\">optmatch · {len(rows)} studies · written {_e(generated)}. "
            f"Margin: worst-case dB by which the best design clears its mask (negative = misses it).</p>\n"
            f"{_tiles(rows)}\n{table}\n<h2>Before you build</h2>\n{_cautions_html()}\n"
            f'<footer>Markdown twin: <a href="{REPORT_MD}">{REPORT_MD}</a></footer>')
    return _page("optmatch batch report", body)


def _element_text(e: Mapping) -> str:
    if e.get("kind") == "lumped":
        return f"{e.get('connection', '')} {str(e.get('part', '')).upper()} {_num(e.get('value'), '.4g')}"
    label = str(e.get("kind", "")).replace("_", " ")
    if e.get("end"):
        label += f" ({e['end']})"
    parts = [label, f"{_num(e.get('electrical_deg'), '.1f')}°", f"{_num(e.get('z0_ohm'), '.0f')} Ω"]
    if isinstance(e.get("physical_m"), (int, float)):
        parts.append(f"{e['physical_m'] * 1000:.0f} mm")
    return " ".join(parts)


def _design_rows(summary: Mapping) -> list[list[str]]:
    out = []
    for d in summary.get("designs", []):
        out.append([str(d.get("rank", "")), "PASS" if d.get("passes") else "FAIL",
                    " · ".join(_element_text(e) for e in d.get("elements", [])),
                    _num(d.get("margin_db"), "+.2f"), _num(d.get("worst_return_loss_db"), ".2f"),
                    _num((d.get("worst_freq_hz") or math.nan) / 1e6, ".2f"), _num(d.get("total_length_wl"), ".3f")])
    return out


DESIGN_HEAD = ("Rank", "Mask", "Elements, load outwards", "Margin (dB)", "Worst RL (dB)", "At (MHz)", "Length (λ)")


CUT_COLUMNS = (("element", "#"), ("part", "Part"), ("cable", "Cable"), ("source", "From"),
               ("cut_mm", "Cut (mm)"), ("cut_long_mm", "Cut long (mm)"), ("electrical_deg", "Electrical (°)"),
               ("width_mm", "Width (mm)"), ("advice", "Advice"))


def _cut_cell(value: Any, key: str) -> str:
    if value is None or value == "":
        return DASH
    if isinstance(value, float):
        return f"{value:.1f}" if key.endswith(("_mm", "_deg")) else f"{value:.4g}"
    return str(value)


def _cut_table(pieces: list) -> tuple[list[str], list[list[str]]]:
    """Header and rows of the cut list: the builder's columns that any piece fills, else every key."""
    dicts = [p if isinstance(p, Mapping) else {"piece": p} for p in pieces]
    known = [(k, label) for k, label in CUT_COLUMNS if any(d.get(k) not in (None, "") for d in dicts)]
    if not known:
        keys: list[str] = []
        for d in dicts:
            keys += [k for k in d if k not in keys]
        known = [(k, k.replace("_", " ")) for k in keys]
    return [label for _, label in known], [[_cut_cell(d.get(k), k) for k, _ in known] for d in dicts]


def _cut_notes(summary: Mapping) -> list[str]:
    """Cable totals and the trim rule that come with a cut list."""
    cut = summary.get("cut_list")
    if not isinstance(cut, Mapping):
        return []
    notes = [f"{t.get('cable', '?')}: {t.get('pieces', '?')} pieces, {_num(t.get('total_mm'), '.0f')} mm in total"
             for t in cut.get("cable_totals") or [] if isinstance(t, Mapping)]
    if cut.get("trim_rule"):
        notes.append(f"Trim: {cut['trim_rule']}")
    return notes


def _html_table(head: Sequence[str], rows: list[list[str]], numeric_from: int) -> str:
    th = "".join(f'<th class="{"num" if i >= numeric_from else ""}">{_e(h)}</th>' for i, h in enumerate(head))
    trs = "".join("<tr>" + "".join(f'<td class="{"num" if i >= numeric_from else ""}">{_e(c)}</td>'
                                   for i, c in enumerate(r)) + "</tr>" for r in rows)
    return f"<table><thead><tr>{th}</tr></thead><tbody>{trs}</tbody></table>"


def study_html(row: Row, folder: Path) -> str:
    """The page of one study: facts, plots, designs, cut list, cautions."""
    s = row.summary or {}
    best = _best(s)
    verdict = _verdict(row) or DASH
    facts = [("Mask", _chip(verdict, verdict.lower()) if verdict != DASH else DASH),
             ("Best margin", f"{_num(s.get('best_margin_db'), '+.2f')} dB"),
             ("Worst return loss", f"{_num((best or {}).get('worst_return_loss_db'), '.2f')} dB at "
                                   f"{_num(((best or {}).get('worst_freq_hz') or math.nan) / 1e6, '.2f')} MHz"),
             ("Total length", _e(_length_text(s))),
             ("System impedance", f"{_num(s.get('system_ohm'), 'g')} Ω"),
             ("Trials", _e(_num(s.get("search", {}).get("trials_complete"), "d"))),
             ("Study file", _e(s.get("file", row.file)))]
    dl = "".join(f"<dt>{_e(k)}</dt><dd>{v}</dd>" for k, v in facts)
    figs = "".join(f'<figure><img src="{_e(name)}" alt="{_e(caption)}"><figcaption>{_e(caption)}</figcaption></figure>'
                   for name, caption in PLOTS if (folder / name).exists())
    pieces = cut_list_pieces(s)
    if pieces:
        head, rows = _cut_table(pieces)
        notes = "".join(f"<li>{_e(n)}</li>" for n in _cut_notes(s))
        cut = _html_table(head, rows, len(head)) + (f"<ul>{notes}</ul>" if notes else "")
    else:
        cut = "<p>No cut list in this study's results yet.</p>" if pieces is None else "<p>Nothing to cut.</p>"
    desc = f'<p class="sub">{_e(s.get("description", ""))}</p>' if s.get("description") else ""
    body = (f'<p><a href="../{REPORT_HTML}">← all studies</a></p>\n<h1>{_e(row.name)}</h1>\n{desc}\n'
            f'<dl class="facts">{dl}</dl>\n<h2>Plots</h2>\n<div class="plots">{figs or "<p>No plots.</p>"}</div>\n'
            f"<h2>Best designs</h2>\n{_html_table(DESIGN_HEAD, _design_rows(s), 3)}\n"
            f"<h2>Cut list</h2>\n{cut}\n<h2>Before you build</h2>\n{_cautions_html()}\n"
            f'<footer>Markdown twin: <a href="{STUDY_MD}">{STUDY_MD}</a> · data: '
            f'<a href="summary.json">summary.json</a></footer>')
    return _page(f"{row.name} · optmatch", body)


# ---------------------------------------------------------------- markdown


def _md_cell(text: str) -> str:
    return str(text).replace("|", "\\|").replace("\n", " ")


def _md_table(head: Sequence[str], rows: list[list[str]], numeric_from: int) -> list[str]:
    align = ["---:" if i >= numeric_from else "---" for i in range(len(head))]
    return (["| " + " | ".join(_md_cell(h) for h in head) + " |", "| " + " | ".join(align) + " |"]
            + ["| " + " | ".join(_md_cell(c) for c in r) + " |" for r in rows])


def batch_markdown(rows: list[Row], generated: str) -> str:
    """The markdown twin of the batch report."""
    table_rows = []
    for r in rows:
        c = _cells(r)
        name = f"[{r.name}]({r.name}/{STUDY_MD})" if r.summary else r.name
        if r.message and r.status != "done":
            name += f" ({r.message})"
        table_rows.append([name, c["status"], c["verdict"], c["margin"], c["length"], c["cut"], c["trials"],
                           c["time"]])
    lines = ["# Batch report", "", f"optmatch · {len(rows)} studies · written {generated}.", "",
             *_md_table([label for _, label, _ in COLUMNS], table_rows, 3), "", "## Before you build", "",
             *[f"- {c}" for c in CAUTIONS], ""]
    return "\n".join(lines)


def study_markdown(row: Row, folder: Path) -> str:
    """The markdown twin of one study page."""
    s = row.summary or {}
    lines = [f"# {row.name}", "", f"[← all studies](../{REPORT_MD})", ""]
    if s.get("description"):
        lines += [str(s["description"]).strip(), ""]
    lines += [f"- Mask: {_verdict(row) or DASH}", f"- Best margin: {_num(s.get('best_margin_db'), '+.2f')} dB",
              f"- Total length: {_length_text(s)}", ""]
    for name, caption in PLOTS:
        if (folder / name).exists():
            lines += [f"![{caption}]({name})", ""]
    lines += ["## Best designs", "", *_md_table(DESIGN_HEAD, _design_rows(s), 3), "", "## Cut list", ""]
    pieces = cut_list_pieces(s)
    if pieces:
        head, rows = _cut_table(pieces)
        lines += _md_table(head, rows, len(head))
        notes = _cut_notes(s)
        if notes:
            lines += ["", *[f"- {n}" for n in notes]]
    else:
        lines.append("No cut list in this study's results yet." if pieces is None else "Nothing to cut.")
    lines += ["", "## Before you build", "", *[f"- {c}" for c in CAUTIONS], ""]
    return "\n".join(lines)


# ---------------------------------------------------------------- writing


def write_report(root: Path) -> tuple[Path, Path]:
    """Write ``report.html``, ``report.md`` and every study page under ``root``; returns the two paths."""
    root = Path(root)
    rows = collect_rows(root)
    generated = time.strftime("%Y-%m-%d %H:%M")
    for r in rows:
        if r.summary:
            folder = root / r.name
            write_text_atomic(folder / STUDY_HTML, study_html(r, folder))
            write_text_atomic(folder / STUDY_MD, study_markdown(r, folder))
    html_path = write_text_atomic(root / REPORT_HTML, batch_html(rows, generated))
    md_path = write_text_atomic(root / REPORT_MD, batch_markdown(rows, generated))
    return html_path, md_path


__all__ = ["Row", "batch_html", "batch_markdown", "collect_rows", "cut_list_pieces", "study_html",
           "study_markdown", "write_report"]
