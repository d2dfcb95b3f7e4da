"""The HTML summary: escaped, self-contained, with figures drawn from the numbers."""

from __future__ import annotations

import base64
import re
import struct

import numpy as np
import pytest

import reviewer
from reviewer.core.errors import ExportError
from reviewer.core.output.figures import slack_histogram_figure
from reviewer.core.output.report import CAUTION, write_summary_html
from tests.core.output.builders import (
    simple_csv,
    summary_for,
)


def test_summary_html_content_and_escaping(tmp_path):
    src = simple_csv(tmp_path)
    out = write_summary_html(summary_for(src), tmp_path / "summary.html")
    page = out.read_text("utf-8")
    assert "ab" * 32 in page
    assert str(src.path) in page
    assert ">7<" in page and ">3<" in page and ">relabel<" in page
    assert "held-out accuracy" in page and ">0.81<" in page and ">0.9<" in page
    assert CAUTION in page and "a person decides" in page
    assert reviewer.__version__ in page
    assert "<script>" not in page
    assert "&lt;script&gt;x&lt;/script&gt;" in page
    assert "ana &lt;b&gt;" in page
    assert "data:image/png;base64," in page
    # Self-contained: nothing fetched from elsewhere.
    assert "http://" not in page and "https://" not in page and "<link" not in page


def test_summary_requires_fingerprint(tmp_path):
    with pytest.raises(ExportError, match="source_sha256"):
        write_summary_html({"source_path": "x.csv"}, tmp_path / "s.html")


def _images(page: str) -> list[bytes]:
    return [
        base64.b64decode(m) for m in re.findall(r"data:image/png;base64,([A-Za-z0-9+/=]+)", page)
    ]


def _png_size(png: bytes) -> tuple[int, int]:
    # PNG specification: the IHDR chunk follows the 8-byte signature; width, height big-endian.
    assert png[:8] == b"\x89PNG\r\n\x1a\n" and png[12:16] == b"IHDR"
    return struct.unpack(">II", png[16:24])


def fit_summary(src, **extra) -> dict:
    rng = np.random.default_rng(3)
    heldout = np.maximum(0.0, rng.normal(0.4, 0.7, 400))
    summary = {
        "source_path": str(src.path),
        "source_sha256": "ab" * 32,
        "settings": {
            "kernel": "rbf",
            "C": 10.0,
            "gamma": "scale",
            "class_weight": None,
            "folds": 5,
            "score": "heldout",
        },
        "counts_by_action": {"relabel": 2},
        "counts_by_reason": {},
        "heldout_slack": heldout,
        "slack": np.zeros(400),  # a flexible fit can give every row training slack 0
        "metrics": {
            "held-out accuracy": (0.81, 0.9),
            "rows wrong_side": (40, 25),
            "rows inside_margin": (90, 80),
            "rows clear": (270, 295),
        },
        "changed_rows": [
            {"row_id": "LOT-2024-000123-A", "zone_before": "wrong_side", "zone_after": "clear"}
        ],
    }
    summary.update(extra)
    return summary


def test_figures_are_drawn_without_window_images(tmp_path):
    src = simple_csv(tmp_path)
    page = write_summary_html(fit_summary(src), tmp_path / "r.html").read_text("utf-8")
    images = _images(page)
    assert len(images) == 2  # slack histogram and before/after bars
    for png in images:
        width, height = _png_size(png)
        assert width >= 600 and height >= 200
    assert "Rows by held-out slack" in page and "The ranking uses held-out slack" in page


def test_histogram_shows_the_slack_the_ranking_uses(tmp_path):
    src = simple_csv(tmp_path)
    summary = fit_summary(src)
    fig = slack_histogram_figure(summary["heldout_slack"])
    ax = fig.axes[0]
    heights = [patch.get_height() for patch in ax.patches]
    # Reference: numpy's histogram of the same positive slacks on 40 bins from 0 to max(2, top).
    slack = summary["heldout_slack"]
    want, _ = np.histogram(slack[slack > 0], bins=np.linspace(0, max(2.0, slack.max()), 41))
    assert heights == want.tolist()
    assert [line.get_xdata()[0] for line in ax.lines] == [1.0]  # the slack = 1 line
    # With the training score the training slack is drawn and named instead.
    page = write_summary_html(
        fit_summary(
            src,
            settings={"score": "training"},
            slack=summary["heldout_slack"],
            heldout_slack=np.full(400, np.nan),
        ),
        tmp_path / "t.html",
    ).read_text("utf-8")
    assert "The ranking uses training slack" in page and "held-out slack" not in page


def test_readable_names_no_empty_tables_and_zone_names(tmp_path):
    src = simple_csv(tmp_path)
    page = write_summary_html(fit_summary(src), tmp_path / "r.html").read_text("utf-8")
    for name in ("Kernel", "Penalty C", "Held-out folds", "Class weights", "Ranking uses"):
        assert f"<th>{name}</th>" in page
    assert "class_weight" not in page and "<th>folds</th>" not in page
    assert "Edits by reason" not in page  # its table would be empty
    assert "Edits by action" in page
    # One display name per zone code on the page; the codes stay in files.
    assert "wrong side" in page and "inside margin" in page
    assert "wrong_side" not in page and "inside_margin" not in page
    bare = {"source_path": str(src.path), "source_sha256": "ab" * 32, "changed_rows": []}
    page = write_summary_html(bare, tmp_path / "b.html").read_text("utf-8")
    assert "<table>" in page and page.count("<table>") == 1  # the source table alone
    assert "Settings" not in page and "Rows whose zone changed" not in page


def test_row_ids_do_not_wrap(tmp_path):
    src = simple_csv(tmp_path)
    page = write_summary_html(fit_summary(src), tmp_path / "r.html").read_text("utf-8")
    assert re.search(r"td\.id[^{]*\{[^}]*white-space:\s*nowrap", page)
    assert '<td class="id">LOT-2024-000123-A</td>' in page


@pytest.mark.parametrize(("flag", "shown"), [(True, "no"), (False, "yes"), (None, "not recorded")])
def test_says_when_the_fit_was_out_of_date(tmp_path, flag, shown):
    src = simple_csv(tmp_path)
    summary = fit_summary(src)
    if flag is not None:
        summary["fit_out_of_date"] = flag
    page = write_summary_html(summary, tmp_path / "r.html").read_text("utf-8")
    assert f"<tr><th>fit up to date at export</th><td>{shown}</td></tr>" in page
    assert ("The fit was out of date at export" in page) is bool(flag)


def test_template_ships_as_package_data():
    from importlib.resources import files

    template = files("reviewer.core.output").joinpath("templates/report.html.j2")
    assert template.is_file() and "{{ title }}" in template.read_text("utf-8")


def test_settings_may_come_as_fit_settings(tmp_path):
    from reviewer.core.values import FitSettings

    src = simple_csv(tmp_path)
    summary = fit_summary(src, settings=FitSettings(kernel="linear", C=2.0, folds=3))
    page = write_summary_html(summary, tmp_path / "r.html").read_text("utf-8")
    assert '<tr><th>Penalty C</th><td class="num">2</td></tr>' in page
    assert '<tr><th>Held-out folds</th><td class="num">3</td></tr>' in page


def test_new_settings_are_a_third_labelled_column_and_the_change_is_the_edits_alone(tmp_path):
    src = simple_csv(tmp_path)
    summary = fit_summary(
        src,
        metrics={"held-out accuracy": (0.8, 0.85), "rows wrong side": (40, 30)},
        metrics_new_settings={"held-out accuracy": 0.7, "rows wrong side": 60},
        settings_by_side={
            "before and after": {"kernel": "rbf", "C": 1.0},
            "new settings": {"kernel": "rbf", "C": 10.0},
        },
    )
    page = write_summary_html(summary, tmp_path / "r.html").read_text("utf-8")
    assert "<th>edits and new settings</th>" in page and "<th>after: edits alone</th>" in page
    # after - before, not new - before: the edits alone are what the change column shows.
    assert (
        '<tr><th>held-out accuracy</th><td class="num">0.8</td><td class="num">0.85</td>'
        '<td class="num">0.7</td><td class="num">+0.05</td></tr>'
    ) in page
    assert '<td class="num">-10</td>' in page
    assert "<th>before and after</th><th>new settings</th>" in page
    assert '<tr><th>Penalty C</th><td class="num">1</td><td class="num">10</td></tr>' in page
    assert len(_images(page)) == 2  # the bar figure draws the three columns
