"""The report's stylesheet: embedded in the page, no fonts, images or anything else fetched.

Type uses the fonts every system already has (a serif stack for headings, the system sans for text,
a monospace stack for digests). Colours: warm paper, dark ink, a deep teal accent; the severity and
note colours come from the Okabe-Ito palette so they stay apart for colour-blind readers.
"""

from __future__ import annotations

__all__ = ["STYLESHEET"]

STYLESHEET = """
:root {
  --paper: #f4f1ea; --sheet: #ffffff; --ink: #1f2328; --muted: #5d636b; --rule: #dcd7cd;
  --accent: #1d5c63; --accent-soft: #dcebea; --amber: #E69F00; --amber-soft: #fdf3dd;
  --vermillion: #b84f00; --blue: #0072B2;
  --serif: Georgia, "Iowan Old Style", "Palatino Linotype", "Book Antiqua", "Times New Roman", serif;
  --sans: system-ui, -apple-system, "Segoe UI", Roboto, "Noto Sans", "Liberation Sans", Arial, sans-serif;
  --mono: ui-monospace, "SFMono-Regular", Menlo, Consolas, "DejaVu Sans Mono", "Liberation Mono", monospace;
}
* { box-sizing: border-box; }
html { background: var(--paper); }
body { margin: 0; color: var(--ink); font: 15px/1.55 var(--sans); }
.sheet { max-width: 1060px; margin: 0 auto; background: var(--sheet); padding: 0 56px 40px;
         border-left: 6px solid var(--accent); box-shadow: 0 0 0 1px var(--rule); }
.masthead { padding: 44px 0 6px; }
.kicker { margin: 0 0 8px; font-size: 12px; font-weight: 650; letter-spacing: .16em; text-transform: uppercase;
          color: var(--accent); }
h1 { margin: 0 0 10px; font: 400 40px/1.12 var(--serif); letter-spacing: -.01em; }
.lede { margin: 0; color: var(--muted); font-size: 15px; }
.facts { display: grid; grid-template-columns: repeat(auto-fit, minmax(138px, 1fr)); margin: 22px 0 0;
         border-top: 1px solid var(--rule); border-left: 1px solid var(--rule); }
.facts > div { padding: 10px 14px 12px; border-right: 1px solid var(--rule); border-bottom: 1px solid var(--rule); }
.facts dt { font-size: 11px; letter-spacing: .09em; text-transform: uppercase; color: var(--muted); }
.facts dd { margin: 3px 0 0; font: 400 22px/1.2 var(--serif); font-variant-numeric: tabular-nums; }
nav.contents { margin: 22px 0 0; padding: 14px 18px; background: var(--accent-soft); }
nav.contents p { margin: 0 0 6px; font-size: 11px; font-weight: 650; letter-spacing: .12em; text-transform: uppercase;
                 color: var(--accent); }
nav.contents ol { margin: 0; padding-left: 22px; columns: 2; column-gap: 40px; }
nav.contents a { color: var(--ink); text-decoration: none; border-bottom: 1px solid var(--rule); }
section { margin-top: 46px; }
h2 { display: flex; align-items: baseline; gap: 14px; margin: 0 0 6px; padding-top: 16px;
     border-top: 1px solid var(--ink); font: 400 28px/1.2 var(--serif); }
h2 .secno { flex: none; min-width: 30px; padding: 3px 8px; border-radius: 2px; background: var(--accent);
            color: #fff; font: 700 14px/1.3 var(--sans); text-align: center; }
.intro { margin: 4px 0 12px; color: var(--muted); max-width: 76ch; }
h3 { margin: 30px 0 8px; font-size: 13px; font-weight: 700; letter-spacing: .08em; text-transform: uppercase;
     color: var(--accent); }
h3 .curve { color: var(--ink); letter-spacing: .02em; text-transform: none; font: 400 19px var(--serif); }
h4 { margin: 20px 0 6px; font-size: 14px; font-weight: 650; }
p { max-width: 82ch; }
table { width: 100%; margin: 8px 0 6px; border-collapse: collapse; font-size: 13px;
        font-variant-numeric: tabular-nums; }
caption { caption-side: top; text-align: left; padding: 0 0 6px; color: var(--muted); font-size: 12.5px; }
th { padding: 6px 8px; border-bottom: 1.5px solid var(--ink); vertical-align: bottom; text-align: left;
     font-size: 11px; font-weight: 650; letter-spacing: .05em; text-transform: uppercase; color: var(--muted); }
td { padding: 5px 8px; border-bottom: 1px solid var(--rule); vertical-align: top; }
th.n, td.n { text-align: right; }
td.n { white-space: nowrap; }
.table-wrap { overflow-x: auto; }
table.results { font-size: 12.5px; }
table.results th, table.results td { padding-left: 5px; padding-right: 5px; }
tbody tr:hover td { background: #faf8f3; }
table.settings th[scope=row] { width: 24%; text-transform: none; letter-spacing: 0; font-size: 13px;
                               color: var(--ink); font-weight: 600; border-bottom: 1px solid var(--rule); }
tr.has-verdict td { border-bottom: 0; padding-bottom: 1px; }
tr.verdict td { padding-top: 0; color: var(--muted); font-size: 12.5px; font-style: italic; }
tr.verdict td::before { content: "\\2192\\00a0"; font-style: normal; color: var(--accent); }
.more { color: var(--muted); font-size: 12.5px; }
td.muted { color: var(--muted); }
.known-at { margin: 12px 0; padding: 12px 14px; border: 3px solid #b8520a; background: #fff4e5; font-size: 15px; }
ul.verdicts { margin: 8px 0; padding-left: 20px; font-size: 13.5px; }
.mono, code { font-family: var(--mono); font-size: 12px; word-break: break-all; }
.sev { display: inline-block; padding: 0 6px; border-radius: 2px; font-size: 11.5px; font-weight: 650;
       border: 1px solid currentColor; }
.sev-reject { color: var(--vermillion); }
.sev-warn { color: #8a5a00; }
.sev-info { color: var(--blue); }
.note { margin: 10px 0; padding: 8px 12px; border-left: 4px solid var(--amber); background: var(--amber-soft);
        font-size: 13.5px; max-width: none; }
.empty { margin: 8px 0; padding: 10px 12px; border: 1px dashed var(--rule); color: var(--muted); font-size: 13.5px; }
figure.chart { margin: 16px 0 28px; }
figure.chart svg { display: block; width: 100%; height: auto; }
figcaption { margin-top: 6px; padding-left: 10px; border-left: 3px solid var(--accent-soft); color: var(--muted);
             font-size: 12.5px; }
.chart-svg * { stroke-linejoin: round; stroke-linecap: butt; }
.chart-svg image { image-rendering: pixelated; }
details { margin: 8px 0; }
details > summary { cursor: pointer; color: var(--accent); font-size: 13.5px; }
dl.meta { display: grid; grid-template-columns: max-content 1fr; gap: 4px 18px; margin: 8px 0; font-size: 13.5px; }
dl.meta dt { color: var(--muted); }
dl.meta dd { margin: 0; }
ol.cautions { padding-left: 22px; }
ol.cautions li { margin: 0 0 10px; max-width: 82ch; }
ol.cautions strong { color: var(--accent); }
footer { margin-top: 48px; padding-top: 12px; border-top: 1px solid var(--rule); color: var(--muted); font-size: 12px; }
.sumgrid { display: grid; grid-template-columns: repeat(auto-fit, minmax(440px, 1fr)); gap: 8px 36px; }
h3.sumhead { margin: 14px 0 4px; color: var(--ink); letter-spacing: .02em; text-transform: none;
             font: 400 19px var(--serif); }
table.grid { font-size: 12.5px; margin-top: 2px; }
table.grid caption { font-size: 12px; }
table.grid th, table.grid td { padding: 3px 6px; }
table.grid th[scope=row] { text-transform: none; letter-spacing: 0; font-size: 12px; color: var(--ink);
                           border-bottom: 1px solid var(--rule); white-space: nowrap; }
table.grid td { text-align: right; white-space: nowrap; line-height: 1.3; }
table.grid .word { font-size: 11px; font-weight: 650; text-transform: uppercase; letter-spacing: .04em; }
table.grid .bp { color: var(--muted); font-size: 11.5px; }
table.grid td.g-better { background: #dff1ea; }
table.grid td.g-better .word { color: #00684c; }
table.grid td.g-worse { background: #fbe6d8; }
table.grid td.g-worse .word { color: var(--vermillion); }
table.grid td.g-even .word, table.grid td.g-untested .word { color: var(--muted); }
ul.points { margin: 8px 0 4px; padding-left: 18px; font-size: 13.5px; }
ul.points li { margin: 0 0 6px; }
ul.points .caveat { display: block; margin-top: 3px; padding-left: 8px; border-left: 3px solid var(--amber);
                    color: var(--muted); font-size: 12.5px; }
table.signoff { margin-top: 10px; }
table.signoff td, table.signoff th[scope=row] { height: 52px; border-bottom: 1px solid var(--ink); }
table.signoff th[scope=row] { width: 18%; text-transform: none; letter-spacing: 0; font-size: 13px; color: var(--ink);
                              vertical-align: bottom; }
table.signoff td:nth-child(2), table.signoff td:nth-child(3) { width: 30%; }
.remarks { margin-top: 16px; height: 140px; border: 1px solid var(--ink); padding: 6px 10px; }
.remarks p { margin: 0; font-size: 11px; letter-spacing: .09em; text-transform: uppercase; color: var(--muted); }
@media (max-width: 760px) { .sheet { padding: 0 18px 30px; border-left-width: 3px; } nav.contents ol { columns: 1; } }
@page { size: A4; margin: 14mm 12mm 16mm; }
@media print {
  html { background: #fff; }
  html, body { -webkit-print-color-adjust: exact; print-color-adjust: exact; }
  body { font-size: 10pt; }
  .sheet { max-width: none; padding: 0; border: 0; box-shadow: none; }
  nav.contents { display: none; }
  section { break-before: page; margin-top: 0; }
  h2 { border-top: 0; padding-top: 0; font-size: 20pt; }
  h2, h3, h4, caption, .intro { break-after: avoid; }
  figure.chart, figcaption, tr, .sumcurve, table.signoff, .remarks, .note { break-inside: avoid; }
  figure.chart { margin: 8px 0 14px; }
  tr.has-verdict { break-after: avoid; }
  .table-wrap { overflow: visible; }
  table { font-size: 8.5pt; }
  table.results { font-size: 7pt; }
  table.results th, table.results td { padding: 2px 3px; }
  th { font-size: 7pt; }
  tbody tr:hover td { background: none; }
  /* a closed <details> prints open: its content is part of the record */
  details::details-content { content-visibility: visible; display: block; }
  details > * { display: block; }
  details > summary { list-style: none; color: var(--ink); font-weight: 650; }
  details > summary::-webkit-details-marker { display: none; }
  .mono, code { font-size: 7.5pt; }
  td .mono { font-size: 6pt; }
  td { white-space: nowrap; }
  td:last-child:not(.n), table.results td:not(.n), table.settings td, table.signoff td { white-space: normal; }
  .sumgrid { grid-template-columns: 1fr; }
}
"""
