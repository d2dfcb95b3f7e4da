"""A compressed delimited source is cleaned like the plain one and written back compressed."""

from __future__ import annotations

import bz2
import gzip
import lzma
from pathlib import Path

import pytest

from reviewer.core.review.session import ReviewSession

DEMO = Path(__file__).resolve().parents[3] / "reviewer" / "demo_data" / "coffee_lots.csv"
OPEN = {"gz": gzip.decompress, "bz2": bz2.decompress, "xz": lzma.decompress}
PACK = {"gz": gzip.compress, "bz2": bz2.compress, "xz": lzma.compress}


def _clean(data: Path, out: Path, tmp: Path) -> bytes:
    with ReviewSession.open(
        data, label="grade", id_column="lot_id", session_path=tmp / f"{data.name}.s"
    ) as s:
        s.relabel([0, 5], "exchange")
        s.exclude([2])
        s.export(out)
    return out.read_bytes()


@pytest.mark.parametrize("suffix", ["gz", "bz2", "xz"])
def test_compressed_source_exports_the_same_bytes_compressed(tmp_path: Path, suffix: str) -> None:
    plain = tmp_path / "lots.csv"
    plain.write_bytes(DEMO.read_bytes())
    packed = tmp_path / f"lots.csv.{suffix}"
    packed.write_bytes(PACK[suffix](DEMO.read_bytes()))
    expected = _clean(plain, tmp_path / "clean.csv", tmp_path)
    got = _clean(packed, tmp_path / f"clean.csv.{suffix}", tmp_path)
    assert OPEN[suffix](got) == expected
