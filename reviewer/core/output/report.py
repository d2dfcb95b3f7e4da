"""The HTML summary of a review: a jinja2 template with autoescape, figures drawn by core.

The page is self-contained (inline CSS, figures as data: URIs, no outside links), so it
can be mailed or archived with the cleaned file. Every value passes through the template's
autoescape; the Python side only chooses what to show and in which words.
"""

from __future__ import annotations

import base64
import dataclasses
import datetime as dt
import json
import os
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from reviewer.core.errors import ExportError
from reviewer.core.output.atomic import atomic_write_bytes
from reviewer.core.output.figures import metrics_png, slack_histogram_png
from reviewer.core.plain import plain
from reviewer.core.values import SUPPORTS, ZONES
from reviewer.core.values import display_name as code_name

__all__ = [
    "CAUTION",
    "SETTING_NAMES",
    "SUPPORT_NAMES",
    "ZONE_NAMES",
    "app_version",
    "display_codes",
    "render_summary_html",
    "write_summary_html",
]

CAUTION = (
    "The ranking only suggests which rows to look at; a person decides every change. "
    "Cleaned data used for decisions about people needs the usual care and review."
)

STALE = (
    "The fit was out of date at export: edits were made after the last fit, so the slacks, "
    "zones and before-and-after numbers below describe the labels as they were at that fit, "
    "not the exported file. Refit and export again for numbers that match it."
)

#: One display name per zone and support code, the same as on screen; files keep the codes.
ZONE_NAMES: dict[str, str] = {code: code_name(code) for code in ZONES}
SUPPORT_NAMES: dict[str, str] = {code: code_name(code) for code in SUPPORTS}


def app_version() -> str:
    """The Margin Reviewer version, from its one place (reviewer/_version.py)."""
    from reviewer._version import __version__

    return __version__


#: The before/after table's columns when the latest fit used other settings than the baseline.
NEW_SETTINGS_COLUMNS = ("before", "after: edits alone", "edits and new settings")

#: Readable names of the fit settings (FitSettings fields and what a fit resolved).
SETTING_NAMES: dict[str, str] = {
    "kernel": "Kernel",
    "C": "Penalty C",
    "gamma": "Gamma (as set)",
    "gamma_value": "Gamma used",
    "degree": "Polynomial degree",
    "class_weight": "Class weights",
    "folds": "Held-out folds",
    "seed": "Random seed",
    "score": "Ranking uses",
    "solver": "Solver",
}
_SETTING_VALUES: dict[tuple[str, Any], str] = {
    ("score", "heldout"): "held-out slack",
    ("score", "training"): "training slack",
    ("class_weight", None): "equal",
    ("class_weight", "balanced"): "balanced (inverse class frequency)",
}
_COLUMN_NAMES: dict[str, str] = {
    "row_id": "Row id",
    "row": "Row",
    "model_label_before": "Model's label before",
    "model_label_after": "Model's label after",
    "label": "Label",
    "label_before": "Label as loaded",
    "decided": "Decision",
    "decision": "Decision",
    "reason": "Reason or note",
    "model_label": "Model's label",
}
_CODES = re.compile(r"\b(" + "|".join(map(re.escape, {**ZONE_NAMES, **SUPPORT_NAMES})) + r")\b")
_ID_COLUMNS = {"row_id", "row", "id"}


def display_codes(text: str) -> str:
    """``text`` with every zone and support code replaced by its display name."""
    names = {**ZONE_NAMES, **SUPPORT_NAMES}
    return _CODES.sub(lambda m: names[m.group(1)], text)


def _column_title(key: str) -> str:
    if key in _COLUMN_NAMES:
        return _COLUMN_NAMES[key]
    text = key.replace("_", " ")
    return text[:1].upper() + text[1:]


def _text(value: Any) -> str:
    value = plain(value)
    if value is None:
        return ""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return f"{value:.4g}"
    if isinstance(value, (list, dict)):
        return json.dumps(value, ensure_ascii=False)
    return str(value)


def _is_number(value: Any) -> bool:
    value = plain(value)
    return isinstance(value, (int, float)) and not isinstance(value, bool)


@dataclass
class _Cell:
    text: str
    css: str = ""
    tag: str = "td"


@dataclass
class _Section:
    title: str
    columns: list[_Cell] = field(default_factory=list)
    rows: list[list[_Cell]] = field(default_factory=list)
    figures: list[dict[str, str]] = field(default_factory=list)
    note: str = ""


def _cell(value: Any, *, css: str = "", zone: bool = False) -> _Cell:
    text = _text(value)
    if zone:
        text = display_codes(text)
    if not css and _is_number(value):
        css = "num"
    return _Cell(text, css)


def _figure(png: bytes, caption: str) -> dict[str, str]:
    return {"caption": caption, "data": base64.b64encode(png).decode("ascii")}


def _counts_section(title: str, head: str, counts: Mapping[str, Any] | None) -> _Section | None:
    if not counts:
        return None  # an empty table says nothing; leave it out
    section = _Section(title, [_Cell(head, tag="th"), _Cell("count", tag="th")])
    for key, count in counts.items():
        section.rows.append([_Cell(display_codes(str(key)), tag="th"), _cell(count)])
    return section


def _as_mapping(settings: Any) -> Mapping[str, Any]:
    """Settings as a mapping (a FitSettings dataclass is accepted too)."""
    if not settings:
        return {}
    if dataclasses.is_dataclass(settings) and not isinstance(settings, type):
        return dataclasses.asdict(settings)
    if not isinstance(settings, Mapping):
        raise ExportError(
            f"settings must be a mapping or FitSettings, not {type(settings).__name__}"
        )
    return settings


def _settings_of(summary: Mapping[str, Any]) -> Mapping[str, Any]:
    return _as_mapping(summary.get("settings"))


def _setting_cell(key: str, value: Any) -> _Cell:
    value = plain(value)
    shown = _SETTING_VALUES.get((key, value)) if isinstance(value, (str, type(None))) else None
    return _Cell(shown) if shown is not None else _cell(value)


def _settings_section(summary: Mapping[str, Any]) -> _Section | None:
    """One column of values, or one per side when the sides were fitted differently."""
    sides = {str(k): _as_mapping(v) for k, v in (summary.get("settings_by_side") or {}).items()}
    if not sides:
        settings = _settings_of(summary)
        sides = {"value": settings} if settings else {}
    if not sides:
        return None
    section = _Section(
        "Settings", [_Cell("setting", tag="th"), *(_Cell(side, tag="th") for side in sides)]
    )
    # The known settings in a fixed order (a resolved gamma beside the one asked for), then
    # any others as they come.
    keys = list(dict.fromkeys(str(k) for values in sides.values() for k in values))
    order = {name: i for i, name in enumerate(SETTING_NAMES)}
    keys.sort(key=lambda k: order.get(k, len(order)))
    for key in keys:
        name = SETTING_NAMES.get(key, _column_title(key))
        cells = [_setting_cell(key, values.get(key)) for values in sides.values()]
        section.rows.append([_Cell(name, tag="th"), *cells])
    return section


def _metric_rows(metrics: Mapping[str, Sequence[Any]], n: int) -> list[list[_Cell]]:
    rows = []
    for name, values in metrics.items():
        values = list(values)
        if len(values) != n:
            raise ExportError(f"metric {name!r} has {len(values)} values for {n} columns")
        # The change is after against before (the first two columns): with a third column
        # for new settings, the edits alone stay the number the reader compares.
        change = ""
        if len(values) > 1 and _is_number(values[0]) and _is_number(values[1]):
            delta = plain(values[1]) - plain(values[0])
            change = f"{delta:+.6g}" if isinstance(delta, float) else f"{delta:+d}"
        rows.append(
            [
                _Cell(display_codes(str(name)), tag="th"),
                *(_cell(v) for v in values),
                _Cell(change, "num"),
            ]
        )
    return rows


def _metrics_section(
    title: str, metrics: Mapping[str, Sequence[Any]], columns: Sequence[str], draw: bool
) -> _Section | None:
    if not metrics:
        return None
    section = _Section(
        title,
        [
            _Cell("metric", tag="th"),
            *(_Cell(c, tag="th") for c in columns),
            _Cell("change (edits alone)" if len(columns) > 2 else "change", tag="th"),
        ],
        _metric_rows(metrics, len(columns)),
    )
    if draw:
        accuracy = {display_codes(k): v for k, v in metrics.items() if "accuracy" in k}
        zones = {
            display_codes(k): v
            for k, v in metrics.items()
            if k.startswith("rows ") and any(z in k or ZONE_NAMES[z] in k for z in ZONES)
        }
        png = metrics_png({"Accuracy": accuracy, "Rows by zone": zones}, columns)
        if png is not None:
            caption = f"Accuracy and rows by zone: {', '.join(columns)}"
            section.figures.append(_figure(png, caption))
    return section


def _rows_section(
    rows: Sequence[Mapping[str, Any]] | None, title: str = "Rows whose zone changed"
) -> _Section | None:
    if not rows:
        return None
    keys: list[str] = []
    for row in rows:
        keys += [str(k) for k in row if str(k) not in keys]
    section = _Section(
        title,
        [_Cell(_column_title(k), "id" if k in _ID_COLUMNS else "", "th") for k in keys],
    )
    for row in rows:
        section.rows.append(
            [
                _cell(row.get(k), css="id" if k in _ID_COLUMNS else "", zone=k.startswith("zone"))
                for k in keys
            ]
        )
    return section


def _slack_section(summary: Mapping[str, Any]) -> _Section | None:
    settings = _settings_of(summary)
    heldout = summary.get("heldout_slack")
    training = summary.get("slack")
    use_heldout = settings.get("score", "heldout") == "heldout"
    if use_heldout and heldout is not None and np.isfinite(np.asarray(heldout, float)).any():
        values, baseline, what = heldout, summary.get("baseline_heldout_slack"), "held-out slack"
    elif training is not None:
        values, baseline, what = training, summary.get("baseline_slack"), "training slack"
    else:
        return None
    png = slack_histogram_png(values, what=what, baseline=baseline)
    if png is None:
        return None
    section = _Section("Slack")
    section.note = (
        f"The ranking uses {what}. Rows right of the slack = 1 line are on the wrong side "
        "of the boundary: the model prefers another class for them."
    )
    section.figures.append(_figure(png, f"Rows by {what}"))
    return section


def _images_section(images: Mapping[str, Any] | None, where: Any) -> _Section | None:
    if not images:
        return None
    section = _Section("Figures from the window")
    for caption, png in images.items():
        if not isinstance(png, (bytes, bytearray)) or not bytes(png).startswith(b"\x89PNG"):
            raise ExportError(f"Cannot write summary {where}: image {caption!r} is not PNG")
        section.figures.append(_figure(bytes(png), str(caption)))
    return section


def _before_after(
    summary: Mapping[str, Any],
) -> tuple[list[str], Mapping[str, Sequence[Any]] | None]:
    """Column names and rows of the before/after table, new settings as a third column."""
    metrics = summary.get("metrics")
    new = summary.get("metrics_new_settings")
    if summary.get("metric_columns"):
        return list(summary["metric_columns"]), metrics
    if not metrics or not new:
        return ["before", "after"], metrics
    names = list(dict.fromkeys([*metrics, *new]))
    merged = {k: (*(metrics.get(k) or (None, None)), new.get(k)) for k in names}
    return [*NEW_SETTINGS_COLUMNS], merged


def render_summary_html(summary: Mapping[str, Any], *, where: Any = "summary") -> str:
    """The summary page as text; see write_summary_html for the accepted keys."""
    import jinja2

    __version__ = app_version()
    for key in ("source_path", "source_sha256"):
        if key not in summary:
            raise ExportError(f"Cannot write summary {where}: missing {key!r}")
    when = summary.get("exported_at") or dt.datetime.now(dt.timezone.utc)
    if isinstance(when, dt.datetime):
        when = when.astimezone(dt.timezone.utc).isoformat(timespec="seconds")
    stale = summary.get("fit_out_of_date")

    meta: list[tuple[str, str, bool]] = [
        ("source file", _text(summary["source_path"]), True),
        ("SHA-256", _text(summary["source_sha256"]), True),
    ]
    for key, name in (
        ("label_column", "label column"),
        ("reviewer", "reviewer"),
        ("cleaned_path", "cleaned file"),
        ("audit_path", "audit log"),
    ):
        if summary.get(key) is not None:
            meta.append((name, _text(summary[key]), False))
    meta.append(
        (
            "fit up to date at export",
            "not recorded" if stale is None else ("no" if stale else "yes"),
            False,
        )
    )
    meta.append(("exported at (UTC)", _text(when), False))
    meta.append(("Margin Reviewer version", __version__, False))

    columns, metrics = _before_after(summary)
    tables: dict[str, Mapping[str, Sequence[Any]]] = {}
    if metrics:
        tables["Before and after"] = metrics
    tables.update(summary.get("metric_tables") or {})
    sections = [
        _settings_section(summary),
        _counts_section("Edits by action", "action", summary.get("counts_by_action")),
        _counts_section("Edits by reason", "reason", summary.get("counts_by_reason")),
        _slack_section(summary),
        *(
            _metrics_section(name, metrics, columns, draw=(i == 0))
            for i, (name, metrics) in enumerate(tables.items())
        ),
        _rows_section(summary.get("decided_rows"), "Rows decided"),
        _rows_section(summary.get("changed_rows")),
        _images_section(summary.get("images"), where),
    ]
    env = jinja2.Environment(
        loader=jinja2.PackageLoader("reviewer.core.output", "templates"),
        autoescape=True,
        trim_blocks=True,
        lstrip_blocks=True,
        undefined=jinja2.StrictUndefined,
    )
    return env.get_template("report.html.j2").render(
        title=summary.get("title") or "Review summary",
        caution=CAUTION,
        fit_out_of_date=bool(stale),
        stale_text=STALE,
        meta=meta,
        sections=[s for s in sections if s is not None],
        version=__version__,
        when=_text(when),
    )


def write_summary_html(
    summary: Mapping[str, Any],
    out_path: str | os.PathLike[str],
    *,
    overwrite: bool = False,
    protect: Sequence[str | os.PathLike[str]] = (),
) -> Path:
    """Write a self-contained HTML summary of a review (inline CSS, no outside links).

    Accepted keys (all optional except source_path and source_sha256):
      source_path: str | Path            the data file reviewed
      source_sha256: str                 its SHA-256 fingerprint
      title: str                         heading; default "Review summary"
      reviewer: str                      who reviewed
      label_column: str
      cleaned_path, audit_path: str      where the exports went
      fit_out_of_date: bool              True when edits came after the last fit
      settings: Mapping | FitSettings    fit settings (kernel, C, gamma, folds, seed, ...)
      counts_by_action: Mapping[str, int]
      counts_by_reason: Mapping[str, int]
      heldout_slack, slack: Sequence[float]   the current fit's per-row slacks; the one the
                                         ranking uses (settings["score"]) is drawn
      baseline_heldout_slack, baseline_slack: Sequence[float]   the fit before the edits
      settings_by_side: Mapping[str, Mapping | FitSettings]   settings per side (column
                                         name -> settings), shown side by side instead
      metrics: Mapping[str, Sequence]    one before/after table (and a bar figure)
      metrics_new_settings: Mapping[str, Any]   the latest fit's numbers when it used other
                                         settings: a third column, "edits and new settings"
      metric_columns: Sequence[str]      column names; default ("before", "after")
      metric_tables: Mapping[str, Mapping[str, Sequence]]  more titled tables, same columns
      changed_rows: Sequence[Mapping[str, Any]]            one table row each
      images: Mapping[str, bytes]        caption -> PNG bytes, embedded after the rest
                                         (accepted for older callers; not needed)
      exported_at: str | datetime        default: now, ISO 8601 UTC
    Empty tables are left out. Zone and support codes are shown by their display names
    (ZONE_NAMES, SUPPORT_NAMES). The app version and CAUTION are always included.
    """
    page = render_summary_html(summary, where=out_path)
    return atomic_write_bytes(
        out_path,
        page.encode("utf-8"),
        overwrite=overwrite,
        protect=tuple(Path(p) for p in protect),
    )
