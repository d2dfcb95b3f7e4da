"""The HTML summary: escaped, self-contained, with figures drawn from the numbers."""

from __future__ import annotations

import pytest

import reviewer
from reviewer.core.errors import ExportError
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
