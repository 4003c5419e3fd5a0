"""Self-contained HTML report of a verdict (``Verdict.to_html()``, ``--format html``).

One file that opens anywhere, offline: no script, no external stylesheet, font, image or
link (only in-page ``#anchors``); figures are embedded as base64 PNG written without
the PNG ``Software`` text chunk. The report holds

* the caution and the verdict table (:mod:`discaudit.report.html_table`, the same table
  every renderer formats),
* the data: rows, features, classes and the fingerprint recorded by the audit
  (``meta["fingerprint"]``: SHA-256 of the audited matrix and labels),
* one section per finding: status, summary, the diagnostic figure for checks that have
  one (:mod:`discaudit.plot`), and the details as tables,
* the settings: every :class:`~discaudit.config.Config` field with the value used, its
  default, meaning and source; the severity of each check; the seed and the version.

Every user-supplied string (column names, class and row labels, anything inside the
details) is HTML-escaped with quotes; nothing is computed here beyond formatting. Without
matplotlib the report is written without figures and says so.
"""

from __future__ import annotations

import base64
import dataclasses
import io
from html import escape
from typing import TYPE_CHECKING, Any

from discaudit.config import Config
from discaudit.findings import fmt, fmt_p
from discaudit.report.html_table import format_table
from discaudit.report.labels import CAUTION, status_label
from discaudit.report.table import build

if TYPE_CHECKING:
    from discaudit.verdict import Verdict

#: Tables with more rows than this are folded into a ``<details>`` element.
FOLD_ROWS = 25
#: Lists of plain values longer than this are cut, with the count of the rest.
MAX_LIST_ITEMS = 60
#: Nesting depth beyond which details are shown as plain text.
MAX_DEPTH = 5
DPI = 96

_STYLE = """
body { font-family: system-ui, -apple-system, "Segoe UI", Roboto, Helvetica, Arial, sans-serif;
       max-width: 1180px; margin: 1.5em auto; padding: 0 1em; color: #1a1a1a; line-height: 1.4; }
h1 { font-size: 1.5em; } h2 { font-size: 1.25em; border-bottom: 1px solid #ccc; padding-bottom: .2em; margin-top: 2em; }
h3 { font-size: 1.05em; margin-bottom: .3em; }
table { border-collapse: collapse; margin: .4em 0; font-size: .9em; }
th, td { border: 1px solid #d0d0d0; padding: .2em .5em; text-align: left; vertical-align: top; }
th { background: #f3f3f3; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
table.kv td.num { text-align: left; }
code { font-size: .95em; }
.caution { border: 2px solid #000; padding: .6em .9em; background: #fffbea; }
.status { font-weight: bold; white-space: nowrap; }
.finding { border-left: 6px solid #888; padding: .2em 0 .2em 1em; margin: 1.5em 0; }
.finding[data-status="fail"] { border-left-style: double; border-left-color: #D55E00; }
.finding[data-status="warn"] { border-left-style: dashed; border-left-color: #E69F00; }
.finding[data-status="pass"] { border-left-color: #0072B2; }
figure { margin: .8em 0; } figure img { max-width: 100%; height: auto; border: 1px solid #e0e0e0; }
figcaption { font-size: .85em; color: #333; }
details > summary { cursor: pointer; color: #0b4f8a; }
.changed { font-weight: bold; }
"""


def render(verdict: Verdict, *, plots: bool = True, dpi: int = DPI) -> str:
    """The verdict as one self-contained HTML document.

    Parameters
    ----------
    verdict : Verdict
    plots : bool, default True
        Embed the diagnostic figures (needs matplotlib; left out with a note otherwise).
    dpi : int, default 96
        Resolution of the embedded PNG figures.

    Returns
    -------
    str
        A complete HTML5 document.
    """
    figures, figure_note = _figures(verdict, dpi) if plots else ({}, "Figures were not requested.")
    table = build(verdict)
    meta = verdict.meta
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en">',
        "<head>",
        '<meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{_e(table.title)}</title>",
        f"<style>{_STYLE}</style>",
        "</head>",
        "<body>",
        f"<h1>{_e(table.title)}</h1>",
        f"<p>{_e(table.gate_outcome)} " if table.gate_outcome else "<p>",
        f'Worst check status: <span class="status">{_e(status_label(verdict.status))}</span>. '
        f"Written by discaudit {_e(_version())}; this file is self-contained (no scripts, no external resources).</p>",
        f'<div class="caution"><strong>Caution.</strong> {_e(CAUTION.removeprefix("Caution: "))}</div>',
        _contents(verdict),
        '<h2 id="verdict">Verdict</h2>',
        format_table(
            dataclasses.replace(table, notes=[n for n in table.notes if n != CAUTION])
        ),  # caution: once, above
        '<h2 id="data">Data</h2>',
        _data_section(verdict),
        '<h2 id="findings">Findings</h2>',
    ]
    if figure_note:
        parts.append(f"<p><em>{_e(figure_note)}</em></p>")
    severity = meta.get("severity", {})
    ctx = _Context(_data_names(verdict))
    for key, finding in verdict.findings.items():
        caption = _caption(verdict, key)
        parts.append(_finding_section(key, finding, severity.get(key, "gate"), figures.get(key), ctx, caption))
    parts += ['<h2 id="settings">Settings</h2>', _settings_section(verdict), "</body>", "</html>"]
    return "\n".join(parts) + "\n"


def _data_names(verdict: Verdict) -> set[str]:
    """Feature, class and flagged-row names: printed verbatim, never turned into headings."""
    names = {str(f) for f in verdict.meta.get("features", [])} | {str(c) for c in verdict.meta.get("classes", [])}
    outliers = verdict.findings.get("outliers")
    if outliers is not None:
        for v in outliers.details.get("per_class", {}).values():
            names |= {str(r.get("row")) for r in v.get("flagged_rows", [])} | set(v.get("left_out_of_fit", {}))
    return names


def _caption(verdict: Verdict, key: str) -> str:
    """The figure caption; the outliers one says which classes had a robust fit."""
    if key != "outliers":
        return _CAPTIONS.get(key, "")
    per_class = verdict.findings[key].details.get("per_class", {})
    classical = [c for c, v in per_class.items() if not str(v.get("method", "")).startswith("reweighted")]
    if not classical:
        y_axis = "robust (MCD) squared distance"
    elif len(classical) == len(per_class):
        y_axis = "classical squared distance (every class is too small for a robust fit, so both axes are classical)"
    else:
        y_axis = f"robust (MCD) squared distance; classical for {', '.join(classical)} (too small for a robust fit)"
    return (
        f"Per class, on one scale for all panels: {y_axis} against the classical squared Mahalanobis distance; "
        "dashed line: the class's Gaussian cut-off; dash-dotted: its far-out fence; filled and labelled: flagged "
        "rows (beyond both). Last panel: chi-square Q-Q plot of the distances."
    )


def _version() -> str:
    from discaudit.report.labels import VERSION as __version__

    return str(__version__)


def _e(value: Any) -> str:
    return escape(str(value), quote=True)


def _contents(verdict: Verdict) -> str:
    severity = verdict.meta.get("severity", {})
    items = "".join(
        f'<li><a href="#finding-{_e(k)}"><code>{_e(k)}</code></a>: {_e(status_label(f.status, severity.get(k, "gate")))}</li>'
        for k, f in verdict.findings.items()
    )
    return (
        '<nav><p><a href="#verdict">Verdict</a> · <a href="#data">Data</a> · <a href="#findings">Findings</a> · '
        f'<a href="#settings">Settings</a></p><ul>{items}</ul></nav>'
    )


def _figures(verdict: Verdict, dpi: int) -> tuple[dict[str, tuple[str, str]], str]:
    """Check -> (base64 PNG, alt text) for every check with a plot, and a note if there are none."""
    try:
        from discaudit.plot import plot_verdict, plottable, require_matplotlib

        require_matplotlib()
    except ImportError:
        return {}, "Figures are left out: matplotlib is not installed (pip install 'discaudit[plot]')."
    out = {}
    for key in plottable(verdict):
        fig = plot_verdict(verdict, key)
        buffer = io.BytesIO()
        fig.savefig(buffer, format="png", dpi=dpi, metadata={"Software": None})
        encoded = base64.b64encode(buffer.getvalue()).decode("ascii")
        out[key] = (encoded, f"Diagnostic plot of the {key} check: {verdict.findings[key].summary}")
    return out, ""


def _finding_section(
    key: str, finding: Any, severity: str, figure: tuple[str, str] | None, ctx: _Context, caption: str
) -> str:
    parts = [
        f'<section class="finding" id="finding-{_e(key)}" data-check="{_e(key)}" data-status="{_e(finding.status)}">',
        f'<h3><code>{_e(key)}</code> <span class="status">{_e(status_label(finding.status, severity))}</span>'
        f"{' · ' + _e(finding.figure) if finding.figure else ''}</h3>",
        f"<p>{_e(finding.summary)}</p>",
    ]
    if figure is not None:
        encoded, alt = figure
        parts.append(
            f'<figure data-check="{_e(key)}"><img alt="{_e(alt)}" src="data:image/png;base64,{encoded}">'
            f"<figcaption>{_e(caption)}</figcaption></figure>"
        )
    if finding.details:
        parts.append(
            f"<details open><summary>Details of <code>{_e(key)}</code></summary>{_value(finding.details, 0, ctx)}</details>"
        )
    parts.append("</section>")
    return "\n".join(parts)


_CAPTIONS = {
    "scale_disparity": "Pooled within-class standard deviation of each feature (log scale); hatched bars lie beyond "
    "the threshold times the smallest spread.",
    "collinearity": "VIF of each feature in the pooled within-class correlation (log scale), with the warn (dashed) "
    "and fail (solid) thresholds; hatching gives the level; near dependencies are numbered.",
    "normality": "Per class, on one scale for all panels: sorted classical squared Mahalanobis distances on the "
    "features the tests used against chi-square quantiles; a Gaussian class follows the dotted line; filled: rows "
    "the outlier check flags.",
    "covariance_homogeneity": "95% covariance ellipse of each class on the discriminant plane (solid: classical, "
    "dashed: robust MCD); right: the same ellipses centred, to compare shapes and sizes.",
}


# -- details as tables ---------------------------------------------------------------------------

#: Detail keys whose tables are collapsed by default: a class's robust-fit internals, long row lists.
COLLAPSED_KEYS = frozenset({"fit_internals", "flagged_rows", "left_out_of_fit", "hyperplane", "thresholds", "notes"})
#: Words a heading spells out.
_WORDS = {"p": "p", "sd": "SD", "vif": "VIF", "bic": "BIC", "aic": "AIC", "df": "df", "mcd": "MCD"}


#: Nouns a count names ("n_rows": number of rows; "n_flagged": number flagged).
_COUNTED = frozenset({"rows", "features", "classes", "params", "starts"})


class _Context:
    """What the details renderer needs to know: names from the data, printed as they are."""

    def __init__(self, names: set[str]) -> None:
        self.names = names

    def heading(self, key: Any) -> str:
        """A detail key as a readable heading; feature, class and row names stay verbatim."""
        text = str(key)
        if text in self.names or "_" not in text:
            return _e(text)
        words = text.split("_")
        if words[0] == "n":
            words[0] = "number of" if len(words) > 1 and words[1] in _COUNTED else "number"
        words = [_WORDS.get(w, w) for w in words]
        return _e(" ".join(words).replace("p value", "p-value"))


def _is_scalar(value: Any) -> bool:
    return value is None or isinstance(value, (str, int, float, bool))


def _scalar(value: Any, key: Any = "") -> str:
    """A value as the summaries print it: fmt's compact numbers, 'p < 1e-16' for a p-value at zero."""
    if value is None:
        return "n/a"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float) and str(key).endswith("p_value"):
        return _e(fmt_p(value).removeprefix("p = "))
    if isinstance(value, float):
        return _e(fmt(value))
    return _e(value)


def _cell(value: Any, depth: int, ctx: _Context, key: Any = "") -> str:
    css = ' class="num"' if isinstance(value, (int, float)) and not isinstance(value, bool) else ""
    return f"<td{css}>{_value(value, depth, ctx, key)}</td>"


def _fold(html_table: str, n_rows: int, key: Any = "", label: str | None = None) -> str:
    if n_rows <= FOLD_ROWS and str(key) not in COLLAPSED_KEYS:
        return html_table
    return f"<details><summary>{_e(label or f'{n_rows} rows')}</summary>{html_table}</details>"


def _value(value: Any, depth: int, ctx: _Context, key: Any = "") -> str:
    """Details value as HTML: scalars as text, mappings and records as tables."""
    if _is_scalar(value):
        return _scalar(value, key)
    if depth >= MAX_DEPTH:
        return f"<code>{_e(value)}</code>"
    if isinstance(value, dict):
        if not value:
            return "none"
        inner = list(value.values())
        if len(inner) > 1 and all(isinstance(v, dict) and v for v in inner):
            return _wide_table(value, depth, ctx, key)
        rows = "".join(f"<tr><th>{ctx.heading(k)}</th>{_cell(v, depth + 1, ctx, k)}</tr>" for k, v in value.items())
        return _fold(f'<table class="kv">{rows}</table>', len(value), key, f"{ctx.heading(key)}: {len(value)} entries")
    if isinstance(value, (list, tuple)):
        if not value:
            return "none"
        if all(_is_scalar(v) for v in value):
            shown = ", ".join(_scalar(v, key) for v in value[:MAX_LIST_ITEMS])
            more = f" … and {len(value) - MAX_LIST_ITEMS} more" if len(value) > MAX_LIST_ITEMS else ""
            return shown + more
        if all(isinstance(v, dict) for v in value):
            columns = list(dict.fromkeys(k for v in value for k in v))
            head = "".join(f"<th>{ctx.heading(c)}</th>" for c in columns)
            body = "".join(
                "<tr>"
                + "".join(_cell(v.get(c), depth + 1, ctx, c) if c in v else "<td></td>" for c in columns)
                + "</tr>"
                for v in value
            )
            table = f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"
            return _fold(table, len(value), key, f"{len(value)} rows")
        return "<ul>" + "".join(f"<li>{_value(v, depth + 1, ctx)}</li>" for v in value) + "</ul>"
    return _e(value)


def _wide_table(value: dict[str, dict[str, Any]], depth: int, ctx: _Context, key: Any = "") -> str:
    """A mapping of mappings (e.g. per class) as one table: inner keys down, outer keys across.

    Nested values (a class's flagged rows, its fit internals) sit in their cell, collapsed.
    """
    columns = list(value)
    keys = list(dict.fromkeys(k for v in value.values() for k in v))
    head = "<th></th>" + "".join(f"<th>{ctx.heading(c)}</th>" for c in columns)

    def cell(c: str, k: str) -> str:
        if k not in value[c]:
            return "<td></td>"
        v = value[c][k]
        if _is_scalar(v):
            return _cell(v, depth + 1, ctx, k)
        size = len(v) if isinstance(v, (dict, list)) else 0
        inner = _value(v, depth + 1, ctx, k)
        if not size or "<details>" in inner[:10]:
            return f"<td>{inner}</td>"
        what = (
            "rows"
            if isinstance(v, list) and v and isinstance(v[0], dict)
            else "items"
            if isinstance(v, list)
            else "entries"
        )
        return f"<td><details><summary>{size} {what}</summary>{inner}</details></td>"

    body = "".join(f"<tr><th>{ctx.heading(k)}</th>" + "".join(cell(c, k) for c in columns) + "</tr>" for k in keys)
    return _fold(f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>", len(keys), key)


# -- data and settings -----------------------------------------------------------------------


def _data_section(verdict: Verdict) -> str:
    meta = verdict.meta
    rows = [
        ("rows", meta.get("n_rows")),
        ("features audited", meta.get("n_features")),
        ("classes", meta.get("n_classes")),
    ]
    counts = verdict.findings["sample_size"].details.get("class_counts") if "sample_size" in verdict.findings else None
    fingerprint = meta.get("fingerprint") or {}
    ctx = _Context(_data_names(verdict))
    parts = ['<table class="kv">' + "".join(f"<tr><th>{_e(k)}</th>{_cell(v, 0, ctx)}</tr>" for k, v in rows)]
    if counts:
        parts.append(f"<tr><th>rows per class</th><td>{_value(counts, 1, ctx)}</td></tr>")
    else:
        parts.append(f"<tr><th>class labels</th><td>{_value(meta.get('classes', []), 1, ctx)}</td></tr>")
    parts.append(f"<tr><th>feature names</th><td>{_value(meta.get('features', []), 1, ctx)}</td></tr>")
    if fingerprint:
        parts.append(
            f"<tr><th>SHA-256 fingerprint</th><td><code>{_e(fingerprint.get('sha256', ''))}</code><br>"
            f"<small>{_e(fingerprint.get('rows', ''))} rows x {_e(fingerprint.get('columns', ''))} columns hashed; "
            f"{_e(fingerprint.get('covers', ''))}</small></td></tr>"
        )
    else:
        parts.append("<tr><th>SHA-256 fingerprint</th><td>not recorded by this version</td></tr>")
    if meta.get("sample"):
        parts.append(f"<tr><th>sample</th><td>{_value(meta['sample'], 1, ctx)}</td></tr>")
    parts.append("</table>")
    return "".join(parts)


def _settings_section(verdict: Verdict) -> str:
    meta = verdict.meta
    used = meta.get("config", {})
    rows = []
    for field in Config.describe():
        name = field["name"]
        if name == "severity":
            continue
        value = used.get(name, field["default"])
        changed = value != field["default"]
        mark = ' class="changed"' if changed else ""
        rows.append(
            f"<tr><th><code>{_e(name)}</code></th><td{mark}>{_scalar(value)}{' (changed)' if changed else ''}</td>"
            f"<td>{_scalar(field['default'])}</td><td>{_e(field['doc'])}</td><td>{_e(field['source'])}</td></tr>"
        )
    head = "<tr><th>setting</th><th>value used</th><th>default</th><th>meaning</th><th>source</th></tr>"
    severity = meta.get("severity", {})
    sev_rows = "".join(f"<tr><th><code>{_e(k)}</code></th><td>{_e(v)}</td></tr>" for k, v in severity.items())
    return (
        f"<p>Seed of every random step (<code>random_state</code>): {_scalar(meta.get('random_state'))}. "
        f"discaudit version {_e(_version())}.</p>"
        f"<table><thead>{head}</thead><tbody>{''.join(rows)}</tbody></table>"
        "<h3>Severity of each check</h3><p>gate: counts toward the gate status; advisory: shown only; off: not run.</p>"
        f"<table>{sev_rows}</table>"
    )
