"""The batch report over a results root: ``report.html`` and its markdown twin ``report.md``, plus one
page per study (``<study>/study.html`` and ``<study>/study.md``) with its plots and cut list.

Self-contained and static: inline CSS, no script, plots referenced by relative paths inside the
results root, so the folder can be copied or opened without any network.  Reads only JSON files:
``batch.json`` (state of each study of the last batch, if any) and ``<study>/summary.json``, both
through the typed readers of :mod:`optmatch.outputs.document`: a file of the wrong shape becomes
an error row and one line naming the file and the key, never a traceback.
"""

from __future__ import annotations

import html
import time
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any
from urllib.parse import quote

from optmatch.io.atomic import write_text_atomic
from optmatch.outputs.document import (
    FAIL,
    FAIL_RATING,
    PASS,
    ResultsFileError,
    SummaryDoc,
    read_batch_state,
    read_summary,
)
from optmatch.outputs.markdown import md, md_block, table
from optmatch.outputs.tables import (
    ALTERNATIVE_ALIGN,
    ALTERNATIVE_HEAD,
    BUILD_HEAD,
    DESIGN_HEAD,
    LOAD_HEAD,
    LOADS_ALIGN,
    LOADS_HEAD,
    alternative_cells,
    alternatives_markdown,
    build_cells,
    ceiling_sentence,
    design_cells,
    load_cells,
    load_margin_align,
    load_margin_cells,
    load_margin_head,
    load_sentence,
    loads_rows,
    loads_sentence,
    mask_text,
    mhz,
    num,
)

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
.tile { border: 1px solid var(--line); border-radius: 8px; padding: 10px 16px; min-width: 120px;
        background: var(--band); }
.tile b { display: block; font-size: 24px; } .tile span { color: var(--muted); font-size: 13px; }
table { border-collapse: collapse; width: 100%; font-variant-numeric: tabular-nums; }
th, td { padding: 8px 10px; border-bottom: 1px solid var(--line); text-align: left; vertical-align: top; }
th { font-size: 13px; color: var(--muted); font-weight: 600; background: var(--band); white-space: nowrap; }
td.num, th.num { text-align: right; white-space: nowrap; }
tbody tr:hover { background: #fafbfd; }
.chip { display: inline-block; padding: 1px 9px; border-radius: 999px; font-size: 13px; font-weight: 600;
        white-space: nowrap; }
.chip.pass { color: var(--pass); background: var(--pass-bg); }
.chip.fail { color: var(--fail); background: var(--fail-bg); }
.chip.rating { color: var(--fail); background: var(--warn-bg); border: 1px solid var(--fail); }
.chip.done { color: var(--ink); background: var(--band); border: 1px solid var(--line); }
.chip.error, .chip.interrupted { color: var(--fail); background: var(--fail-bg); }
.chip.running, .chip.pending, .chip.not-finished { color: var(--warn); background: var(--warn-bg); }
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
    """One study in the report: its status, a message, and its summary document when readable."""

    name: str
    status: str
    message: str
    summary: SummaryDoc | None
    file: str


NOT_FINISHED = ("pending", "running", "interrupted", "not finished")
JOURNAL_GLOB = "*.journal"  # a study's trial storage: a folder holding one has started


# ---------------------------------------------------------------- reading


def _summary(path: Path) -> tuple[SummaryDoc | None, str]:
    try:
        return read_summary(path), ""
    except ResultsFileError as exc:
        return None, str(exc)


def collect_rows(root: Path) -> tuple[list[Row], list[str]]:
    """Studies of the last batch (in its order) and every other study folder under ``root``, and one
    line for every results file that cannot be read (the study's row then says so).

    A folder with a journal but no summary.json is a study that started and has not finished.
    """
    root = Path(root)
    rows: list[Row] = []
    problems: list[str] = []
    seen: set[str] = set()
    entries = []
    if (root / STATE_NAME).exists():
        try:
            entries = list(read_batch_state(root / STATE_NAME).studies)
        except ResultsFileError as exc:
            problems.append(str(exc))
    for s in entries:
        if s.name in seen:
            continue
        seen.add(s.name)
        folder = root / s.name
        summary, error = (None, "")
        if s.status != "error" and (folder / "summary.json").exists():
            summary, error = _summary(folder / "summary.json")
        status, message = s.status, s.message
        if error:
            problems.append(error)
            status, message = "error", error
        elif s.status == "done" and summary is None:
            status, message = "error", f"{folder / 'summary.json'}: file not found"
        rows.append(Row(s.name, status, message, summary, s.file))
    folders = sorted({p.parent for p in root.glob("*/summary.json")}
                     | {p.parent for p in root.glob(f"*/{JOURNAL_GLOB}")})
    for folder in folders:
        name = folder.name
        if name in seen:
            continue
        seen.add(name)
        if not (folder / "summary.json").exists():
            rows.append(Row(name, "not finished", "a journal but no results yet: run the study again to resume",
                            None, ""))
            continue
        summary, error = _summary(folder / "summary.json")
        if error:
            problems.append(error)
        rows.append(Row(name, "done" if summary else "error", error, summary, summary.file if summary else ""))
    return rows, problems


# ---------------------------------------------------------------- figures


def _length_text(summary: SummaryDoc | None) -> str:
    best = summary.best if summary else None
    if best is None:
        return DASH
    metres = [e.physical_m for e in best.elements if e.kind != "lumped"]
    text = f"{best.total_length_wl:.3f} λ"
    if metres and all(m is not None for m in metres):
        text += f" · {sum(m or 0.0 for m in metres):.3f} m"
    return text


def _verdict(row: Row) -> str | None:
    return row.summary.verdict if row.summary is not None else None


def _cells(row: Row) -> dict[str, str]:
    """Plain-text cells of one row, shared by the HTML and markdown tables."""
    s = row.summary
    build = s.build if s else None
    return {
        "status": row.status,
        "verdict": _verdict(row) or DASH,
        "margin": num(s.best.margin_db, "+.2f", "+∞") if s and s.best else DASH,
        "loads": loads_met_text(s),
        "length": _length_text(s),
        "cut": str(len(build.pieces)) if build is not None else DASH,
        "trials": str(s.search.trials_complete) if s else DASH,
        "time": f"{s.search.elapsed_s:.0f}" if s else DASH,
    }


COLUMNS = (("study", "Study", False), ("status", "Status", False), ("verdict", "Verdict", False),
           ("margin", "Best margin (dB)", True), ("loads", "Loads met (worst)", True), ("length", "Total length", True),
           ("cut", "Cut-list pieces", True), ("trials", "Trials", True), ("time", "Time (s)", True))


def chip_kind(verdict: str) -> str:
    """CSS class of a verdict or status chip."""
    return {PASS: "pass", FAIL: "fail", FAIL_RATING: "rating"}.get(verdict, verdict.replace(" ", "-"))


def tally(rows: Sequence[Row]) -> list[tuple[int, str]]:
    """The counts shown above the table."""
    return [(len(rows), "studies"), (sum(_verdict(r) == PASS for r in rows), "meet their mask"),
            (sum(_verdict(r) == FAIL for r in rows), "miss their mask"),
            (sum(_verdict(r) == FAIL_RATING for r in rows), "over a rating"),
            (sum(r.status == "error" for r in rows), "errors"),
            (sum(r.status in NOT_FINISHED for r in rows), "not finished")]


# ---------------------------------------------------------------- HTML


def _e(value: Any) -> str:
    return html.escape(str(value), quote=True)


def _page(title: str, body: str) -> str:
    return (f'<!DOCTYPE html>\n<html lang="en">\n<head>\n<meta charset="utf-8">\n'
            f'<meta name="viewport" content="width=device-width, initial-scale=1">\n<title>{_e(title)}</title>\n'
            f"<style>{CSS}</style>\n</head>\n<body>\n<main>\n{body}\n</main>\n</body>\n</html>\n")


def _chip(text: str) -> str:
    return f'<span class="chip {_e(chip_kind(text))}">{_e(text)}</span>'


def _cautions_html() -> str:
    items = "".join(f"<li>{_e(c)}</li>" for c in CAUTIONS)
    return f'<section class="caution"><strong>Safety</strong><ul>{items}</ul></section>'


def _tiles(rows: list[Row]) -> str:
    return '<div class="tiles">' + "".join(f'<div class="tile"><b>{n}</b><span>{_e(t)}</span></div>'
                                          for n, t in tally(rows)) + "</div>"


def batch_html(rows: list[Row], generated: str) -> str:
    """The batch report page."""
    head = "".join(f'<th class="{"num" if num_col else ""}">{_e(label)}</th>' for _, label, num_col in COLUMNS)
    body_rows = []
    for r in rows:
        c = _cells(r)
        link = f'<a href="{_e(quote(r.name))}/{STUDY_HTML}">{_e(r.name)}</a>' if r.summary else _e(r.name)
        first = link + (f'<div class="msg">{_e(r.message)}</div>' if r.message and r.status != "done" else "")
        if r.summary is not None and r.summary.verdict != PASS:
            first += f'<div class="msg">{_e(r.summary.verdict_line)}</div>'
        verdict = _chip(c["verdict"]) if c["verdict"] != DASH else DASH
        cells = [first, _chip(c["status"]), verdict] + [_e(c[k]) for k in ("margin", "loads", "length", "cut", "trials",
                                                                            "time")]
        tds = "".join(f'<td class="{"num" if num_col else ""}">{cell}</td>'
                      for cell, (_, _, num_col) in zip(cells, COLUMNS, strict=True))
        body_rows.append(f'<tr class="study" data-study="{_e(r.name)}">{tds}</tr>')
    table_html = (f'<table id="studies"><thead><tr>{head}</tr></thead><tbody>\n' + "\n".join(body_rows)
                  + "\n</tbody></table>") + _alternatives_html(rows)
    body = (f"<h1>Batch report</h1>\n<p class=\"sub\">optmatch · {len(rows)} studies · written {_e(generated)}. "
            f"Margin: worst-case dB by which the best design clears its mask (negative = misses it). "
            f"FAIL rating: meets the mask but is over a cable's or connector's rating at the drive power.</p>\n"
            f"{_tiles(rows)}\n{table_html}\n<h2>Before you build</h2>\n{_cautions_html()}\n"
            f'<footer>Markdown twin: <a href="{REPORT_MD}">{REPORT_MD}</a></footer>')
    return _page("optmatch batch report", body)


def _alternative_rows(rows: Sequence[Row]) -> list[list[str]]:
    """One row per alternative of every study that compared several networks: the study, then its cells."""
    return [[r.name, *alternative_cells(a)] for r in rows if r.summary is not None for a in r.summary.alternatives]


def _alternatives_html(rows: Sequence[Row]) -> str:
    found = _alternative_rows(rows)
    if not found:
        return ""
    return ("\n<h2>Alternatives compared</h2>\n<p class=\"sub\">Studies that searched several named networks for "
            "one load and mask: each row is one network's best design.</p>\n"
            + _html_table(("study", *ALTERNATIVE_HEAD), found, "l" + ALTERNATIVE_ALIGN).replace(
                "<table>", '<table id="alternatives">', 1))


def _html_table(head: Sequence[str], rows: Sequence[Sequence[str]], numeric: str = "") -> str:
    """A table; ``numeric`` marks right-aligned columns with ``r`` (one letter per column)."""
    def cls(i: int) -> str:
        return "num" if i < len(numeric) and numeric[i] == "r" else ""

    th = "".join(f'<th class="{cls(i)}">{_e(h)}</th>' for i, h in enumerate(head))
    trs = "".join("<tr>" + "".join(f'<td class="{cls(i)}">{_e(c)}</td>' for i, c in enumerate(r)) + "</tr>"
                  for r in rows)
    return f"<table><thead><tr>{th}</tr></thead><tbody>{trs}</tbody></table>"


def _build_notes(s: SummaryDoc) -> list[str]:
    """Cable totals and the trim rule that come with the build sheet."""
    if s.build is None:
        return []
    notes = [f"{t.cable}: {t.pieces} pieces, {t.total_mm:.0f} mm in total" for t in s.build.cable_totals]
    return [*notes, f"Trim: {s.build.trim_rule}"]


def study_html(row: Row, folder: Path) -> str:
    """The page of one study: verdict, the load, plots, designs, build sheet, ratings, cautions."""
    s = row.summary
    assert s is not None
    best = s.best
    facts = [("Verdict", _chip(s.verdict)), ("Why", _e(s.verdict_line)),
             ("Best margin", f"{_e(num(best.margin_db, '+.2f', '+∞')) if best else DASH} dB"),
             ("Worst return loss", f"{num(best.worst_return_loss_db, '.2f')} dB at {best.worst_freq_hz / 1e6:.2f} MHz"
              if best else DASH),
             ("Total length", _e(_length_text(s))), ("System impedance", f"{s.system_ohm:g} Ω"),
             ("Mask", _e(mask_text(s.mask))),
             ("Electrical lengths at", _e(mhz(s.reference_hz))), ("Ranked by", _e(s.ranked_by)),
             ("Trials", str(s.search.trials_complete)), ("Study file", _e(s.file or row.file))]
    if s.invented:
        facts.insert(2, ("Data", "invented (the study says so): not a measurement"))
    dl = "".join(f"<dt>{_e(k)}</dt><dd>{v}</dd>" for k, v in facts)
    figs = "".join(f'<figure><img src="{_e(name)}" alt="{_e(caption)}"><figcaption>{_e(caption)}</figcaption></figure>'
                   for name, caption in PLOTS if (folder / name).exists())
    if s.build is not None and s.build.pieces:
        notes = "".join(f"<li>{_e(n)}</li>" for n in _build_notes(s))
        steps = "".join(f"<li>{_e(step)}</li>" for step in s.build.assembly)
        build = (f"<p>{_e(s.build.allowances)}</p>" + _html_table(BUILD_HEAD, build_cells(s.build), "rllrlrrr")
                 + f"<h3>Assembly, from the load to the source</h3><ol class=\"assembly\">{steps}</ol>"
                 + f"<ul>{notes}</ul>")
    else:
        build = "<p>Nothing to cut.</p>"
    ratings = ""
    if best is not None and best.power is not None:
        items = "".join(f"<li>{_e(line)}</li>" for line in best.power.over_rating)
        ratings = (f"<h2>Ratings at {best.power.drive_w:g} W</h2>"
                   + (f'<ul class="msg">{items}</ul>' if items else "<p>Within every rating in force.</p>"))
    desc = f'<p class="sub">{_e(s.description)}</p>' if s.description else ""
    ceiling = f"<p>{_e(ceiling_sentence(s))}</p>\n" if s.feasibility is not None else ""
    alternatives = ""
    if s.alternatives:
        compared = _html_table(ALTERNATIVE_HEAD, [alternative_cells(a) for a in s.alternatives], ALTERNATIVE_ALIGN)
        alternatives = f"<h2>Alternatives compared</h2>\n{compared}\n"
    body = (f'<p><a href="../{REPORT_HTML}">← all studies</a></p>\n<h1>{_e(row.name)}</h1>\n{desc}\n'
            f'<dl class="facts">{dl}</dl>\n<h2>The load alone (no network)</h2>\n'
            f"{_html_table(LOAD_HEAD, load_cells(s.load), 'lrrrr')}\n<p>{_e(load_sentence(s.load))}</p>\n"
            f"{ceiling}"
            f'<h2>Plots</h2>\n<div class="plots">{figs or "<p>No plots.</p>"}</div>\n'
            + alternatives
            + f"<h2>Ranked designs</h2>\n{_html_table(DESIGN_HEAD, [design_cells(d) for d in s.designs], 'rlrrrrrl')}\n"
            + _loads_html(s)
            + f"<h2>Build sheet of the best design</h2>\n{build}\n{ratings}\n"
            f"<h2>Before you build</h2>\n{_cautions_html()}\n"
            f'<footer>Markdown twin: <a href="{STUDY_MD}">{STUDY_MD}</a> · data: '
            f'<a href="summary.json">summary.json</a></footer>')
    return _page(f"{row.name} · optmatch", body)


def loads_met_text(s: SummaryDoc | None) -> str:
    """The best design's loads met and its worst load, for a study with several loads (else a dash)."""
    if s is None or not s.several_loads or s.best is None:
        return DASH
    best = s.best
    worst = next((lm for lm in best.load_margins if lm.load == best.worst_load), None)
    tail = f" ({best.worst_load} {num(worst.margin_db, '+.2f', '+∞')} dB)" if worst is not None else ""
    return f"{best.loads_met} of {len(s.loads)}{tail}"


def _loads_html(s: SummaryDoc) -> str:
    """With several loads: the loads alone and each ranked design's margin on each load."""
    if not s.several_loads:
        return ""
    alone, left = loads_rows(s)
    more = f" (the {len(alone)} worst alone; {left} more in summary.json)" if left else ""
    return (f"<h2>Each load</h2>\n<p>{_e(loads_sentence(s) + more)}</p>\n"
            + _html_table(LOADS_HEAD, alone, LOADS_ALIGN) + "\n"
            + _html_table(load_margin_head(s), [load_margin_cells(d, s) for d in s.designs], load_margin_align(s))
            + "\n")


def _loads_markdown(s: SummaryDoc) -> list[str]:
    if not s.several_loads:
        return []
    alone, left = loads_rows(s)
    more = f" (the {len(alone)} worst alone; {left} more in summary.json)" if left else ""
    return ["## Each load", "", md(loads_sentence(s) + more), "",
            *table(LOADS_HEAD, [[md(c) for c in r] for r in alone], LOADS_ALIGN), "",
            *table(load_margin_head(s), [[md(c) for c in load_margin_cells(d, s)] for d in s.designs],
                   load_margin_align(s)), ""]


# ---------------------------------------------------------------- markdown


def batch_markdown(rows: list[Row], generated: str) -> str:
    """The markdown twin of the batch report."""
    table_rows = []
    for r in rows:
        c = _cells(r)
        name = f"[{md(r.name)}]({quote(r.name)}/{STUDY_MD})" if r.summary else md(r.name)
        if r.message and r.status != "done":
            name += f" ({md(r.message)})"
        if r.summary is not None and r.summary.verdict != PASS:
            name += f" ({md(r.summary.verdict_line)})"
        table_rows.append([name, md(c["status"]), md(c["verdict"]), c["margin"], md(c["loads"]), c["length"], c["cut"],
                           c["trials"], c["time"]])
    counts = ", ".join(f"{n} {t}" for n, t in tally(rows)[1:])
    lines = ["# Batch report", "", f"optmatch · {len(rows)} studies ({counts}) · written {md(generated)}.", "",
             *table([label for _, label, _ in COLUMNS], table_rows, "lll" + "r" * 5), ""]
    found = _alternative_rows(rows)
    if found:
        cells = [[md(c) for c in r] for r in found]
        lines += ["## Alternatives compared", "",
                  *table(("study", *ALTERNATIVE_HEAD), cells, "l" + ALTERNATIVE_ALIGN), ""]
    lines += ["## Before you build", "",
             *[f"- {c}" for c in CAUTIONS], ""]
    return "\n".join(lines)


def study_markdown(row: Row, folder: Path) -> str:
    """The markdown twin of one study page."""
    s = row.summary
    assert s is not None
    lines = [f"# {md(row.name)}", "", f"[← all studies](../{REPORT_MD})", ""]
    if s.description:
        lines += [md_block(s.description), ""]
    lines += [f"**Verdict:** {md(s.verdict_line)}", "", f"- Mask: {mask_text(s.mask)}",
              f"- Total length: {_length_text(s)}",
              f"- Electrical lengths at {mhz(s.reference_hz)}", ""]
    if s.invented:
        lines += ["*The study says its data is invented: not a measurement.*", ""]
    lines += ["## The load alone (no network)", "", *table(LOAD_HEAD, load_cells(s.load), "lrrrr"), "",
              load_sentence(s.load), ""]
    if s.feasibility is not None:
        lines += [md(ceiling_sentence(s)), ""]
    for name, caption in PLOTS:
        if (folder / name).exists():
            lines += [f"![{caption}]({name})", ""]
    lines += alternatives_markdown(s)
    lines += ["## Ranked designs", "", *table(DESIGN_HEAD, [[md(c) for c in design_cells(d)] for d in s.designs],
                                             "llrrrrrl"), ""]
    lines += _loads_markdown(s)
    lines += ["## Build sheet of the best design", ""]
    if s.build is not None and s.build.pieces:
        lines += [md_block(s.build.allowances), "",
                  *table(BUILD_HEAD, [[md(c) for c in r] for r in build_cells(s.build)], "llllllrr"), "",
                  "Assembly, from the load to the source:", "",
                  *[f"{k}. {md_block(step)}" for k, step in enumerate(s.build.assembly, start=1)], "",
                  *[f"- {md_block(n)}" for n in _build_notes(s)]]
    else:
        lines.append("Nothing to cut.")
    best = s.best
    if best is not None and best.power is not None:
        lines += ["", f"## Ratings at {best.power.drive_w:g} W", ""]
        lines += ([f"- **Over rating:** {md(line)}" for line in best.power.over_rating]
                  or ["Within every rating in force."])
    lines += ["", "## Before you build", "", *[f"- {c}" for c in CAUTIONS], ""]
    return "\n".join(lines)


# ---------------------------------------------------------------- writing


@dataclass(frozen=True)
class Written:
    """The report's two files, and a line for every results file that could not be read."""

    html: Path
    markdown: Path
    problems: list[str]


def write_report(root: Path) -> Written:
    """Write ``report.html``, ``report.md`` and every study page under ``root``."""
    root = Path(root)
    rows, problems = collect_rows(root)
    generated = time.strftime("%Y-%m-%d %H:%M")
    for r in rows:
        if r.summary is not None:
            folder = root / r.name
            write_text_atomic(folder / STUDY_HTML, study_html(r, folder))
            write_text_atomic(folder / STUDY_MD, study_markdown(r, folder))
    html_path = write_text_atomic(root / REPORT_HTML, batch_html(rows, generated))
    md_path = write_text_atomic(root / REPORT_MD, batch_markdown(rows, generated))
    return Written(html_path, md_path, problems)


__all__ = ["Row", "Written", "batch_html", "batch_markdown", "collect_rows", "study_html", "study_markdown",
           "write_report"]
