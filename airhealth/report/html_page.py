"""The page of the HTML report: one Jinja2 template (autoescaped) and its inline style sheet.

Everything the page needs is inside it: no font, script or style sheet is fetched from anywhere (the page
has no script at all), so it opens offline and sends no request. The print rules keep figures and tables
whole on a page, drop the link styling and the table of contents' page furniture, and print at A4 width.
Section bodies arrive as markup already escaped by :mod:`airhealth.report.html`; every other value is
escaped by the template.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import jinja2

__all__ = ["STYLE", "render_page"]

STYLE = """
:root{--ink:#1d2430;--muted:#4b5563;--rule:#d0d5dd;--accent:#0072B2}
body{font-family:system-ui,-apple-system,'Segoe UI',Roboto,'DejaVu Sans',sans-serif;max-width:1080px;
margin:2em auto;padding:0 1.2em;color:var(--ink);line-height:1.5}
h1{font-size:1.65em;margin-bottom:.2em}
h2{border-bottom:2px solid var(--accent);padding-bottom:.15em;margin-top:2.2em}
h3{font-size:1.02em;margin:1.4em 0 .3em}
nav.toc{background:#f6f8fa;border:1px solid var(--rule);padding:.5em 1.2em;margin:1.2em 0}
nav.toc ol{margin:.3em 0;padding-left:1.4em}nav.toc a{color:var(--ink)}
table{border-collapse:collapse;margin:.6em 0 1.2em;font-size:.88em;font-variant-numeric:tabular-nums}
th,td{border-bottom:1px solid #e4e7ec;padding:.25em .6em;text-align:right;vertical-align:top}
th:first-child,td:first-child{text-align:left}thead th{background:#eef2f6;border-bottom:1px solid var(--rule)}
.caution{background:#fff8e6;border-left:4px solid #E69F00;padding:.6em 1em}
.note{color:var(--muted);font-size:.88em}.qaic{border-left:3px solid var(--rule);padding-left:.6em}
figure{margin:1.2em 0}figure img{max-width:100%;height:auto;display:block}
figcaption{font-size:.92em;margin-top:.3em}.files{color:var(--muted);font-size:.9em}
footer{margin-top:2.5em;border-top:1px solid var(--rule);padding-top:.6em}
@media print{
  @page{size:A4;margin:16mm 14mm}
  body{max-width:none;margin:0;padding:0;font-size:10.5pt;color:#000}
  h2{break-after:avoid;page-break-after:avoid}h3{break-after:avoid}
  figure,table,.caution{break-inside:avoid;page-break-inside:avoid}
  figure img{max-height:22cm}
  a{color:inherit;text-decoration:none}.files{display:none}
  nav.toc{background:none;border:none;padding:0}
  thead{display:table-header-group}
}
"""

_TEMPLATE = """<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">{{ generator }}
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{{ title }}</title><style>{{ style }}</style></head>
<body>
<header><h1>{{ title }}</h1>
{% if subtitle %}<p class="note">{{ subtitle }}</p>{% endif %}
<p class="caution"><strong>Caution.</strong> {{ caution }}</p>
{% if suppression %}<p class="note">{{ suppression }}</p>{% endif %}
</header>
{% if sections %}<nav class="toc" aria-label="Contents"><strong>Contents</strong><ol>
{% for s in sections %}<li><a href="#{{ s.id }}">{{ s.title }}</a></li>
{% endfor %}</ol></nav>{% endif %}
<main>
{% for s in sections %}<section id="{{ s.id }}"><h2>{{ s.title }}</h2>
{{ s.body }}
</section>
{% endfor %}</main>
<footer><p class="caution"><strong>Caution.</strong> {{ caution }}</p>
<p class="note">Written by airhealth on {{ stamp }}. Everything in this report was computed locally; no data
were sent anywhere, and the page loads nothing from the internet.</p></footer>
</body></html>
"""


class _Markup(str):
    """Text already escaped (or the module's own constants): Jinja2's autoescape leaves objects with an
    ``__html__`` method as they are."""

    def __html__(self) -> str:
        return str(self)


_ENVIRONMENT = jinja2.Environment(autoescape=True, undefined=jinja2.StrictUndefined, keep_trailing_newline=True)
_PAGE = _ENVIRONMENT.from_string(_TEMPLATE)


def render_page(
    *,
    title: str,
    subtitle: str,
    caution: str,
    suppression: str,
    sections: Sequence[Mapping[str, Any]],
    stamp: str,
    generator: str,
) -> str:
    """The whole page. ``sections``: ``id``, ``title`` (text, escaped here) and ``body`` (escaped markup)."""
    shown = [{"id": s["id"], "title": s["title"], "body": _Markup(s["body"])} for s in sections]
    return _PAGE.render(
        title=title,
        subtitle=subtitle,
        caution=caution,
        suppression=suppression,
        sections=shown,
        stamp=stamp,
        generator=_Markup(generator),
        style=_Markup(STYLE),
    )
