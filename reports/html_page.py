"""The shell of every HTML page rig writes: self-contained (inline style, inline SVG, no network)
and with every value from a user or a file escaped."""

from __future__ import annotations

import html
from collections.abc import Sequence

VERDICT_CLASS = {
    "pass": "v-pass",
    "conditional pass": "v-cpass",
    "conditional fail": "v-cfail",
    "fail": "v-fail",
    "error": "v-error",
    "skipped": "v-skip",
}

DECISION_CLASS = {
    "confirmed failure": "d-confirmed",
    "no fault found": "d-clear",
    "inconclusive": "d-inconclusive",
    "undecided": "d-undecided",
}
"""A screen's decision on the unit (``rig.screening``): its colour repeats its words."""

_STYLE = """
body { font-family: sans-serif; margin: 1.5em; color: #1b1b1b; max-width: 80em; }
h1 { font-size: 1.5em; } h2 { font-size: 1.2em; margin-top: 1.6em; }
table { border-collapse: collapse; margin: 0.5em 0; }
th, td { border: 1px solid #999; padding: 0.2em 0.5em; text-align: left; vertical-align: top; }
th { background: #e8e8e8; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
.v-pass { background: #d7f0d7; } .v-cpass { background: #eef6c8; }
.v-cfail { background: #fbe3c0; } .v-fail { background: #f6c6c6; }
.v-error { background: #e0d0f0; } .v-skip { color: #666; }
.d-clear { background: #d7f0d7; } .d-confirmed { background: #f6c6c6; }
.d-inconclusive { background: #fbe3c0; } .d-undecided { background: #e0d0f0; }
#headline span { padding: 0.1em 0.3em; }
.note { color: #444; font-size: 0.9em; } figure { margin: 0.8em 0; }
figcaption { font-size: 0.9em; color: #444; }
"""


def esc(value: object) -> str:
    """Text for HTML: ``<``, ``>``, ``&`` and quotes escaped; None shows as empty."""
    return "" if value is None else html.escape(str(value), quote=True)


def table(
    headers: Sequence[str],
    rows: Sequence[Sequence[object]],
    *,
    numeric: Sequence[int] = (),
    verdict_column: int | None = None,
    table_id: str = "",
) -> str:
    """An HTML table; every cell escaped, the verdict column coloured by verdict."""
    head = "".join(f"<th>{esc(h)}</th>" for h in headers)
    body = []
    for row in rows:
        cells = []
        for i, cell in enumerate(row):
            classes = []
            if i in numeric:
                classes.append("num")
            if i == verdict_column and str(cell) in VERDICT_CLASS:
                classes.append(VERDICT_CLASS[str(cell)])
            attr = f' class="{" ".join(classes)}"' if classes else ""
            cells.append(f"<td{attr}>{esc(cell)}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    ident = f' id="{esc(table_id)}"' if table_id else ""
    return f"<table{ident}><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def figure(svg: str, caption: str) -> str:
    """An inline SVG plot (markup made by matplotlib, not from user text) with its caption."""
    return f"<figure>{svg}<figcaption>{esc(caption)}</figcaption></figure>"


def page(title: str, sections: Sequence[str]) -> str:
    """A complete HTML document; ``sections`` are already-escaped HTML fragments."""
    return (
        "<!DOCTYPE html>\n"
        '<html lang="en"><head><meta charset="utf-8">'
        '<meta http-equiv="Content-Security-Policy" content="default-src \'none\'; '
        "style-src 'unsafe-inline'; img-src data:\">"
        f"<title>{esc(title)}</title><style>{_STYLE}</style></head>\n<body>\n"
        + "\n".join(sections)
        + "\n</body></html>\n"
    )
