"""The bundled text demo (maintenance work orders): reproducible, its planted errors honest,
its descriptions varied enough that the trade is not given away by one fixed phrase."""

from __future__ import annotations

import importlib.util
import shutil
import subprocess
import sys
from pathlib import Path

import pandas as pd

DEMO = Path(__file__).resolve().parent.parent / "reviewer" / "demo_data"
DATA = "work_orders.csv"
PLANTED = "planted_errors_work_orders.csv"
TRADES = {"electrical", "plumbing", "hvac", "carpentry", "locksmith"}


def _load_generator():
    spec = importlib.util.spec_from_file_location("work_orders", DEMO / "work_orders.py")
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_running_the_script_rewrites_identical_files(tmp_path: Path) -> None:
    shutil.copy(DEMO / "work_orders.py", tmp_path / "work_orders.py")
    subprocess.run(
        [sys.executable, str(tmp_path / "work_orders.py")], check=True, capture_output=True
    )
    for name in (DATA, PLANTED):
        assert (tmp_path / name).read_bytes() == (DEMO / name).read_bytes(), name


def test_the_seed_decides_the_data() -> None:
    gen = _load_generator()
    a, _ = gen.generate(n_rows=300, seed=1)
    again, _ = gen.generate(n_rows=300, seed=1)
    b, _ = gen.generate(n_rows=300, seed=2)
    pd.testing.assert_frame_equal(a, again)
    assert not a["description"].equals(b["description"])


def test_planted_list_matches_the_data() -> None:
    data = pd.read_csv(DEMO / DATA).set_index("order_id")
    planted = pd.read_csv(DEMO / PLANTED)
    assert list(planted.columns) == ["order_id", "true_label", "given_label"]
    assert planted["order_id"].is_unique
    assert set(planted["order_id"]) <= set(data.index)
    assert (data.loc[planted["order_id"], "trade"].to_numpy() == planted["given_label"]).all()
    assert (planted["true_label"] != planted["given_label"]).all()
    assert abs(len(planted) / len(data) - 0.05) < 0.005
    assert set(planted["true_label"]) <= TRADES and set(planted["given_label"]) <= TRADES


def test_columns_are_as_documented_and_the_text_varies() -> None:
    data = pd.read_csv(DEMO / DATA)
    assert list(data.columns) == [
        "order_id",
        "opened_on",
        "site",
        "floor",
        "priority",
        "reported_by",
        "description",
        "trade",
    ]
    assert len(data) == 3000 and data["order_id"].is_unique
    assert set(data["trade"]) == TRADES
    assert data["description"].notna().all()
    # Mostly distinct descriptions, none longer than a short message.
    assert data["description"].nunique() > 0.9 * len(data)
    assert data["description"].str.len().max() < 400
    # Shared things and vague words: a trade's usual object does not decide it alone.
    doors = data[data["description"].str.contains(r"\bdoor\b", case=False)]
    assert {"carpentry", "locksmith"} <= set(doors["trade"])
