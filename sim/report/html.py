"""The self-contained HTML page of a report: one file, figures embedded as base64 PNG data URIs,
the style inline, no script and no external resource, so it opens anywhere without a network.
"""

from __future__ import annotations

import base64
import html
from typing import Sequence

from sim import __version__

__all__ = ["CAUTIONS", "render_page"]

CAUTIONS = (
    "This report is an analysis aid for comparing and screening guidance designs, not flight "
    "certification. covey's truth models (gravity, thermosphere and its solar-activity drivers, "
    "density error, navigation and actuator error models) are approximations with their own "
    "errors, the statistics hold only for the dispersions that were sampled, and the metrics are "
    "taken at the logged samples (a closer approach between samples is missed). Defer to the "
    "mission's own verification and validation, its range-safety, conjunction-assessment and "
    "operational safety practice, and licensed engineering practice for any decision about real "
    "spacecraft."
)
"""The cautions paragraph every report carries."""

_CSS = """
:root { --ink:#262b30; --muted:#5c6670; --rule:#d5dae0; --accent:#0f5c6e; --pass:#1f6b3a;
        --fail:#9b2c2c; --paper:#ffffff; --shade:#f3f5f7; }
* { box-sizing: border-box; }
body { margin:0; background:var(--paper); color:var(--ink);
       font: 14px/1.45 "DejaVu Sans", "Liberation Sans", Arial, sans-serif; }
main { max-width: 1060px; margin: 0 auto; padding: 24px 28px 48px; }
header { border-bottom: 3px solid var(--accent); padding-bottom: 10px; margin-bottom: 14px; }
h1 { font-size: 24px; margin: 0 0 4px; letter-spacing: .2px; }
h2 { font-size: 18px; margin: 30px 0 10px; color: var(--accent);
     border-bottom: 1px solid var(--rule); padding-bottom: 3px; }
.sub { color: var(--muted); margin: 0; }
nav ol { columns: 2; margin: 6px 0 0; padding-left: 20px; color: var(--muted); }
nav a { color: var(--accent); text-decoration: none; }
.cautions { background: var(--shade); border-left: 4px solid var(--fail); padding: 8px 14px; }
.cautions h2 { border: 0; margin-top: 6px; color: var(--fail); }
table.data { border-collapse: collapse; margin: 8px 0 4px; font-size: 12.5px; width: auto; }
table.data caption { caption-side: top; text-align: left; font-weight: bold; padding: 4px 0; }
table.data th, table.data td { padding: 3px 9px; border-bottom: 1px solid var(--rule);
                               vertical-align: top; }
table.data thead th { border-top: 1.5px solid var(--ink); border-bottom: 1px solid var(--ink);
                      background: var(--shade); }
table.data tbody tr:last-child td { border-bottom: 1.5px solid var(--ink); }
td.r, th.r { text-align: right; font-variant-numeric: tabular-nums; }
td.l, th.l { text-align: left; }
tr.fail td { color: var(--fail); }
tr.pass td:last-child { color: var(--pass); font-weight: bold; }
tr.fail td:last-child { font-weight: bold; }
p.note { color: var(--muted); font-size: 12px; margin: 2px 0 14px; max-width: 900px; }
.scroll { overflow-x: auto; }
figure { margin: 18px 0 26px; }
figure img { display: block; max-width: 100%; height: auto; border: 1px solid var(--rule); }
figcaption { font-size: 13px; margin-top: 6px; max-width: 940px; }
figcaption .files { color: var(--muted); font-size: 11.5px; }
ul.skipped li { color: var(--muted); }
details { margin: 8px 0; }
summary { cursor: pointer; color: var(--accent); }
pre { background: var(--shade); padding: 10px; overflow-x: auto; font-size: 12px; }
footer { margin-top: 36px; border-top: 1px solid var(--rule); padding-top: 8px; color: var(--muted);
         font-size: 12px; }
"""


def _esc(x) -> str:
    return html.escape(str(x))


def _figure_html(spec) -> str:
    data = base64.b64encode(spec.png_bytes).decode("ascii")
    files = ", ".join(p.name for k, p in sorted(spec.files.items()) if k in ("png", "pdf"))
    w = h = None
    if spec.png_bytes[:8] == b"\x89PNG\r\n\x1a\n":
        w = int.from_bytes(spec.png_bytes[16:20], "big")
        h = int.from_bytes(spec.png_bytes[20:24], "big")
    size = f' width="{w}" height="{h}"' if w and h else ""
    return (f'<figure id="fig-{spec.number}">'
            f'<img src="data:image/png;base64,{data}" alt="Figure {spec.number}: {_esc(spec.title)}"{size}>'
            f"<figcaption><b>Figure {spec.number}.</b> {_esc(spec.caption)} "
            f'<span class="files">Files: {_esc(files)}.</span></figcaption></figure>')


def render_page(*, title: str, subtitle: str, sections: Sequence[tuple[str, str, str]],
                figures: Sequence, skipped: Sequence, appendix: Sequence[tuple] = ()) -> str:
    """The HTML page.

    Parameters
    ----------
    title, subtitle : str
    sections : sequence of (anchor, heading, inner HTML)
        Shown after the cautions, in order (tables already rendered).
    figures : sequence of FigureSpec
        Numbered, with ``png_bytes`` set.
    skipped : sequence of Skipped
        Figures not drawn and why.
    appendix : sequence of (summary, text) or (summary, html, True)
        Collapsed ``<details>`` blocks of preformatted text (e.g. the scenario file), or of HTML
        (e.g. a long table) when the third item is true.
    """
    toc = [("cautions", "Cautions")] + [(a, h) for a, h, _ in sections]
    if figures:
        toc.append(("figures", "Figures"))
    if skipped:
        toc.append(("not-drawn", "Figures not drawn"))
    if appendix:
        toc.append(("appendix", "Appendix"))
    out = ["<!DOCTYPE html>", '<html lang="en">', "<head>", '<meta charset="utf-8">',
           '<meta name="viewport" content="width=device-width, initial-scale=1">',
           f"<title>{_esc(title)}</title>", f"<style>{_CSS}</style>", "</head>", "<body>", "<main>",
           f"<header><h1>{_esc(title)}</h1><p class=\"sub\">{_esc(subtitle)}</p></header>",
           "<nav><ol>" + "".join(f'<li><a href="#{a}">{_esc(h)}</a></li>' for a, h in toc)
           + "</ol></nav>",
           f'<section id="cautions" class="cautions"><h2>Cautions</h2><p>{_esc(CAUTIONS)}</p></section>']
    for anchor, heading, inner in sections:
        out.append(f'<section id="{_esc(anchor)}"><h2>{_esc(heading)}</h2>'
                   f'<div class="scroll">{inner}</div></section>')
    if figures:
        out.append('<section id="figures"><h2>Figures</h2>')
        out += [_figure_html(f) for f in figures]
        out.append("</section>")
    if skipped:
        out.append('<section id="not-drawn"><h2>Figures not drawn</h2><ul class="skipped">')
        out += [f"<li><b>{_esc(s.title)}</b>: {_esc(s.reason)}.</li>" for s in skipped]
        out.append("</ul></section>")
    if appendix:
        out.append('<section id="appendix"><h2>Appendix</h2>')
        for item in appendix:
            summ, text = item[0], item[1]
            body = text if len(item) > 2 and item[2] else f"<pre>{_esc(text)}</pre>"
            out.append(f'<details><summary>{_esc(summ)}</summary><div class="scroll">{body}</div></details>')
        out.append("</section>")
    out.append(f"<footer>Written by covey {__version__} from the run logs and campaign summaries "
               "alone (figures also as PDF and PNG, tables as CSV and LaTeX beside this page). "
               f"{_esc(CAUTIONS.split('.')[0])}.</footer>")
    out += ["</main>", "</body>", "</html>", ""]
    return "\n".join(out)
