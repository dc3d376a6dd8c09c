"""HTML building blocks of the reports: escaping, number formats, tables, figures, attribute lists,
the page style and the cautions every report carries."""

from __future__ import annotations

import base64
import html
import numpy as np

from metasim.units import format_share

CAUTIONS = (
    "metasim computes colorimetry, not eye safety. Lasers and other high-radiance light sources fall "
    "under photobiological safety standards — IEC 60825-1 (safety of laser products) and IEC 62471 "
    "(photobiological safety of lamps and lamp systems) — and under local regulations; nothing in this "
    "report says whether a design is safe to look at.",
    "Population results describe model observers (CIE 170-1:2006 with individual deviations whose "
    "standard deviations are estimates), not measurements of any real audience.",
    "The 1, 2 and 3 CIE 2000 unit thresholds are common practice, no source; gamut coverage of the "
    "broadcast and cinema gamuts is computed for the CIE 1931 2° observer.",
)
STYLE = """
body{font-family:system-ui,-apple-system,'Segoe UI',sans-serif;margin:0;background:#fbfaf7;color:#1f2328}
main{max-width:1040px;margin:0 auto;padding:24px 28px 60px}
h1{font-size:1.6em;margin:0 0 4px;color:#2b3a55} h2{margin-top:2.2em;border-bottom:2px solid #d9633b;
padding-bottom:4px;color:#2b3a55} h3{color:#3c4a66}
.sub{color:#5b6270;margin:0 0 18px} table{border-collapse:collapse;margin:10px 0 18px;font-size:.92em}
th,td{border-bottom:1px solid #dcdad3;padding:5px 10px;text-align:right} th:first-child,td:first-child{text-align:left}
th{background:#efece4} figure{margin:18px 0} figure img{max-width:100%;border:1px solid #e4e1d8;background:#fff}
figcaption{color:#5b6270;font-size:.9em} pre{background:#f1efe8;padding:10px;overflow-x:auto;font-size:.85em}
.caution{background:#fff4e5;border-left:4px solid #d9633b;padding:8px 14px;margin:8px 0}
.answer{background:#fff;border:2px solid #2b3a55;border-radius:6px;padding:4px 20px 10px;margin:12px 0 24px}
.answer h2{margin-top:.6em;border:none;padding:0} .answer p{margin:.5em 0;font-size:1.05em}
.answer .short-caution{font-size:.9em;color:#7a3b1f;border-top:1px solid #dcdad3;padding-top:8px}
.headline{font-size:1.05em;color:#2b3a55;margin:6px 0} dl{display:grid;grid-template-columns:max-content auto;gap:4px 16px}
dt{font-weight:600;color:#3c4a66} dd{margin:0} table.settings td{text-align:left}
"""
REFERENCE_NAMES = {"bt709": "BT.709", "display_p3": "Display P3", "dci_p3": "DCI-P3", "bt2020": "BT.2020"}


def _e(text) -> str:
    return html.escape(str(text))


def _num(value, digits: int = 2) -> str:
    value = float(value)
    if not np.isfinite(value):
        return "–"
    if abs(value) >= 1e5:
        return f"{value:.3g}"
    return f"{value:.{digits}f}"


def _pct(value) -> str:
    value = float(value)
    return "–" if not np.isfinite(value) else format_share(value, 1)


def _table(header: list[str], rows: list[list[str]], cls: str | None = None) -> str:
    head = "".join(f"<th>{_e(h)}</th>" for h in header)
    body = "".join("<tr>" + "".join(f"<td>{_e(c)}</td>" for c in row) + "</tr>" for row in rows)
    return f"<table{f' class={cls!r}' if cls else ''}><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def _image(png: bytes, caption: str) -> str:
    data = base64.b64encode(png).decode("ascii")
    return (f'<figure><img alt="{_e(caption)}" src="data:image/png;base64,{data}">'
            f"<figcaption>{_e(caption)}</figcaption></figure>")


def _attribute_list(attrs: dict) -> str:
    """The attributes of a result as a table of settings with readable names and values
    (:mod:`metasim.report.labels`); a nested group of settings (stored as JSON) gets a table of its own."""
    from metasim.report.labels import HIDDEN, key_label, parameter_rows, parsed

    flat, groups = {}, []
    for key, value in attrs.items():
        value = parsed(value)
        if isinstance(value, dict) and value and key not in HIDDEN:
            groups.append(f"<h3>{_e(key_label(key)[:1].upper() + key_label(key)[1:])}</h3>"
                          + _table(["parameter", "value"], parameter_rows(value), "settings"))
        else:
            flat[key] = value
    return _table(["setting", "value"], parameter_rows(flat), "settings") + "".join(groups)
