"""The built wheel works on its own: installed into a fresh virtual environment outside the
source tree, it scans a bundled data set and opens the demo window (offscreen)."""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]

CHECK = textwrap.dedent(
    """
    import os, sys, time
    import reviewer
    assert "site-packages" in reviewer.__file__, reviewer.__file__
    # A data set scikit-learn ships (Wolberg et al., UCI breast cancer), as a DataFrame.
    from sklearn.datasets import load_breast_cancer
    data = load_breast_cancer(as_frame=True)
    frame = data.data.iloc[:, :6].assign(diagnosis=data.target.map({0: "m", 1: "b"}))
    table = reviewer.scan(frame, "diagnosis", kernel="linear", C=1.0, folds=3)
    assert len(table) == 569 and list(table.columns)[:3] == ["row_id", "label", "model_label"]
    from reviewer.cli import DEMO_DIR
    assert (DEMO_DIR / "coffee_lots.csv").is_file()
    from reviewer.gui.app import build_window, make_app
    app = make_app()
    window = build_window(DEMO_DIR / "coffee_lots.csv", label="grade", id_column="lot_id",
                          demo=True)
    window.show()
    deadline = time.time() + 120
    while window.session is None and time.time() < deadline:
        app.processEvents()
        time.sleep(0.05)
    assert window.session is not None and window.session.n_rows == 1800
    window.close()
    print("wheel ok")
    """
)


@pytest.mark.slow
def test_the_wheel_installs_and_runs_outside_the_source_tree(tmp_path: Path) -> None:
    dist = tmp_path / "dist"
    subprocess.run(
        [sys.executable, "-m", "build", "--wheel", "--outdir", str(dist), str(ROOT)],
        check=True,
        capture_output=True,
        timeout=900,
    )
    (wheel,) = dist.glob("margin_reviewer-*.whl")
    venv = tmp_path / "venv"
    subprocess.run([sys.executable, "-m", "venv", str(venv)], check=True, timeout=300)
    py = venv / "bin" / "python"
    subprocess.run(
        [str(py), "-m", "pip", "install", "--quiet", str(wheel)],
        check=True,
        capture_output=True,
        timeout=1800,
    )
    home = tmp_path / "home"
    env = {
        **os.environ,
        "QT_QPA_PLATFORM": "offscreen",
        "XDG_DATA_HOME": str(home / "data"),
        "XDG_CONFIG_HOME": str(home / "config"),
        "PYTHONPATH": "",
    }
    run = subprocess.run(
        [str(py), "-c", CHECK], cwd=tmp_path, env=env, capture_output=True, text=True, timeout=600
    )
    assert run.returncode == 0, run.stderr[-3000:]
    assert "wheel ok" in run.stdout
    version = subprocess.run(
        [str(venv / "bin" / "margin-reviewer"), "--version"],
        cwd=tmp_path, env=env, capture_output=True, text=True, check=True,
    )  # fmt: skip
    from reviewer._version import __version__

    assert version.stdout.strip() == f"margin-reviewer {__version__}"
