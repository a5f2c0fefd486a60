"""HTML pieces of a report: page, tables, caution, audio players (all text escaped).

The page is self-contained (styles inline, figures as base64 PNG data
URIs) and prints on A4 and US Letter alike: ``@page`` sets only the margins
(the paper size is the printer's), the printable width is kept within the
narrower page (A4: 210 mm less 2 x 14 mm), and figures, table rows and
summary boxes are kept from breaking across pages. Audio players are
hidden in print; the clip's file name is printed instead.
"""

from __future__ import annotations

import base64
import html
import math
import os
from typing import Iterable, Mapping, Sequence

from livevowel import CAUTION

#: The line on health-data privacy every report carries.
PRIVACY = ("This document holds health-related data about the speaker, named here only by a pseudonym. "
           "Local rules on health-data privacy apply to how it is stored, shared and kept.")

CSS = """
:root { --ink:#242424; --muted:#5E5E5E; --rule:#D9D6CF; --soft:#F4F2EE; --blue:#0072B2;
        --green:#009E73; --red:#D55E00; --orange:#E69F00; }
* { box-sizing: border-box; }
html { background: #ECEAE5; }
body { font-family: "DejaVu Sans", "Segoe UI", Helvetica, Arial, sans-serif; color: var(--ink);
       font-size: 14px; line-height: 1.45; max-width: 1060px; margin: 0 auto; padding: 28px 36px 40px;
       background: #FFFFFF; }
header { border-bottom: 2px solid var(--ink); padding-bottom: 10px; margin-bottom: 14px; }
h1 { font-size: 22px; margin: 0 0 4px; font-weight: 600; letter-spacing: .01em; }
h2 { font-size: 16.5px; margin: 26px 0 8px; padding-bottom: 3px; border-bottom: 1px solid var(--rule);
     font-weight: 600; }
h3 { font-size: 14.5px; margin: 18px 0 6px; font-weight: 600; }
p { margin: 6px 0; }
.sub { color: var(--muted); font-size: 13px; }
.meta { display: grid; grid-template-columns: max-content 1fr max-content 1fr; gap: 2px 14px; margin: 8px 0 0;
        font-size: 13px; }
.meta dt { color: var(--muted); }
.meta dd { margin: 0; overflow-wrap: anywhere; }
.caution { border-left: 4px solid var(--orange); background: #FFF8EA; padding: 8px 12px; margin: 12px 0;
           font-size: 13px; }
.caution p { margin: 3px 0; }
.numbers { display: flex; gap: 10px; flex-wrap: wrap; margin: 10px 0 4px; }
.numbers div { background: var(--soft); border-radius: 6px; padding: 7px 14px; min-width: 104px; }
.numbers b { display: block; font-size: 21px; font-weight: 600; }
.numbers span { color: var(--muted); font-size: 12px; }
figure { margin: 10px 0 6px; }
figure img { width: 100%; max-width: 760px; height: auto; display: block; border: 1px solid var(--rule); }
figcaption { color: var(--muted); font-size: 12.5px; margin-top: 4px; max-width: 760px; }
table { border-collapse: collapse; margin: 6px 0 10px; font-size: 13px; }
th, td { padding: 3px 9px; text-align: left; border-bottom: 1px solid var(--rule); vertical-align: middle; }
th { font-weight: 600; background: var(--soft); white-space: nowrap; }
td.n, th.n { text-align: right; font-variant-numeric: tabular-nums; }
tr.hit td.res { color: #00795A; font-weight: 600; }
tr.miss td.res { color: #B34E00; font-weight: 600; }
td.res .mk { display: inline-block; width: 1.1em; }
.attempts td { padding: 2px 7px; font-size: 12.5px; }
audio { height: 28px; width: 150px; vertical-align: middle; }
.clipname { display: none; font-size: 11px; color: var(--muted); }
.flags { color: var(--muted); font-size: 12px; }
.settings { font-size: 12px; color: var(--muted); columns: 2; column-gap: 28px; margin: 4px 0; }
.settings div { break-inside: avoid; }
footer { margin-top: 28px; padding-top: 8px; border-top: 1px solid var(--rule); color: var(--muted);
         font-size: 12px; }
.note { color: var(--muted); font-size: 12.5px; }
@page { margin: 14mm 13mm 16mm 13mm; }
@media print {
  html { background: #FFFFFF; }
  body { max-width: 182mm; padding: 0; margin: 0; font-size: 9.5pt; }
  h1 { font-size: 15pt; } h2 { font-size: 12pt; margin-top: 14pt; } h3 { font-size: 10.5pt; }
  h2, h3 { break-after: avoid; page-break-after: avoid; }
  figure, .numbers, .caution, tr, .meta { break-inside: avoid; page-break-inside: avoid; }
  figure img { max-width: 100%; border: none; }
  table { font-size: 8.5pt; }
  .attempts td { font-size: 8pt; padding: 1px 4px; }
  /* the attempts table within the printed column: headers and long cells wrap */
  .attempts { width: 100%; }
  .attempts th { white-space: normal; font-size: 8pt; padding: 1px 4px; }
  .attempts td { overflow-wrap: anywhere; }
  thead { display: table-header-group; }
  audio { display: none; }
  .clipname { display: inline; }
  .settings { font-size: 7.5pt; }
  .numbers { gap: 6px; }
  .numbers div { min-width: 0; padding: 3px 10px; }
  .numbers b { font-size: 13pt; }
  a { color: inherit; text-decoration: none; }
  * { -webkit-print-color-adjust: exact; print-color-adjust: exact; }
}
"""


def esc(v) -> str:
    """Escape any value as HTML text (``None`` becomes an en dash)."""
    if v is None:
        return "\u2013"
    return html.escape(str(v), quote=True)


def pct(hits: int, trials: int) -> str:
    return f"{100.0 * hits / trials:.0f} %" if trials else "\u2013"


def num(v, fmt: str = ".0f") -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "\u2013"
    return format(v, fmt)


def data_uri(data: bytes, mime: str) -> str:
    return f"data:{mime};base64,{base64.b64encode(data).decode('ascii')}"


def img(png: bytes, alt: str, caption: str = "") -> str:
    cap = f"<figcaption>{esc(caption)}</figcaption>" if caption else ""
    return f'<figure><img src="{data_uri(png, "image/png")}" alt="{esc(alt)}">{cap}</figure>'


def meta_list(pairs: Iterable[tuple[str, object]]) -> str:
    return '<dl class="meta">' + "".join(f"<dt>{esc(k)}</dt><dd>{esc(v)}</dd>" for k, v in pairs) + "</dl>"


def caution_box() -> str:
    return f'<div class="caution"><p><b>Caution.</b> {esc(CAUTION)}</p><p>{esc(PRIVACY)}</p></div>'


def numbers(items: Sequence[tuple[str, str]]) -> str:
    return '<div class="numbers">' + "".join(f"<div><b>{esc(v)}</b><span>{esc(k)}</span></div>"
                                             for k, v in items) + "</div>"


def _range(v, unit: str, fmt: str) -> str:
    if v is None:
        return "\u2013"
    lo, hi = v
    return f"{lo:{fmt}}{unit}" if abs(hi - lo) < 1e-9 else f"{lo:{fmt}}\u2013{hi:{fmt}}{unit}"


def tally_table(rows, *, first: str, css_class: str) -> str:
    """A per-target or per-block table (``rows`` of :class:`~livevowel.report.data.TallyRow`)."""
    head = (f'<table class="{esc(css_class)}"><thead><tr><th>{esc(first)}</th><th class="n">attempts</th>'
            '<th class="n">trials</th><th class="n">hits</th><th class="n">accuracy</th>'
            '<th class="n">hit size</th><th class="n">hold</th></tr></thead><tbody>')
    body = "".join(
        f'<tr data-key="{esc(t.key)}"><td>{esc(t.label)}</td><td class="n">{t.attempts}</td>'
        f'<td class="n trials">{t.trials}</td><td class="n hits">{t.hits}</td>'
        f'<td class="n acc">{pct(t.hits, t.trials)}</td>'
        f'<td class="n">{_range(t.hit_sizes_sd, " SD", ".2f")}</td><td class="n">{_range(t.holds_s, " s", ".2f")}</td>'
        "</tr>" for t in rows)
    return head + body + "</tbody></table>"


def page(title: str, body: str) -> str:
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
            f"<title>{esc(title)}</title><style>{CSS}</style></head><body>\n{body}\n</body></html>\n")


#: Settings keys holding file paths; reports show only the file name.
_PATH_KEYS = ("path", "profile", "drill_file", "source")


def settings_block(settings: Mapping) -> str:
    """Settings as short ``section.key: value`` lines (nested mappings flattened)."""
    lines: list[str] = []

    def walk(prefix: str, v) -> None:
        if isinstance(v, Mapping):
            for k in sorted(v):
                walk(f"{prefix}.{k}" if prefix else str(k), v[k])
        elif v is not None:
            if prefix.rsplit(".", 1)[-1] in _PATH_KEYS:
                v = os.path.basename(str(v))   # folders may name people; the file name is enough
            lines.append(f"<div>{esc(prefix)}: {esc(v)}</div>")

    walk("", settings)
    return '<div class="settings">' + "".join(lines) + "</div>" if lines else '<p class="note">none recorded</p>'
