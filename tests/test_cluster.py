"""Scan and probe on a Dask cluster: a scheduler and two workers on 127.0.0.1, started here.

The workers are separate processes, so everything a fold needs (the feature matrix, the
estimator, a fold-feature builder) crosses a network connection; the output must equal the
serial one. Needs the optional ``distributed`` package (the ``cluster`` and ``test`` extras).
"""

from __future__ import annotations

import os
import socket
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import reviewer
from reviewer import SettingsError

distributed = pytest.importorskip("distributed")

DEMO = Path(reviewer.__file__).resolve().parent / "demo_data" / "coffee_lots.csv"
ROOT = Path(reviewer.__file__).resolve().parent.parent
START_SECONDS = 60


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def _wait_for_port(port: int, deadline: float) -> None:
    while time.monotonic() < deadline:
        try:
            with socket.create_connection(("127.0.0.1", port), timeout=1):
                return
        except OSError:
            time.sleep(0.2)
    raise TimeoutError(f"no Dask scheduler on port {port} after {START_SECONDS} s")


@pytest.fixture(scope="module")
def cluster(tmp_path_factory):
    port = _free_port()
    address = f"tcp://127.0.0.1:{port}"
    logs = tmp_path_factory.mktemp("dask")
    env = {**os.environ, "PYTHONPATH": str(ROOT)}  # workers import this checkout's reviewer
    procs: list[subprocess.Popen] = []

    def start(args: list[str], name: str) -> None:
        log = open(logs / f"{name}.log", "w")
        procs.append(
            subprocess.Popen(
                [sys.executable, "-m", *args], stdout=log, stderr=subprocess.STDOUT, env=env
            )
        )

    try:
        start(
            [
                "distributed.cli.dask_scheduler",
                "--host",
                "127.0.0.1",
                "--port",
                str(port),
                "--no-dashboard",
            ],
            "scheduler",
        )
        deadline = time.monotonic() + START_SECONDS
        _wait_for_port(port, deadline)
        for i in range(2):
            start(
                [
                    "distributed.cli.dask_worker",
                    address,
                    "--nworkers",
                    "1",
                    "--nthreads",
                    "1",
                    "--no-dashboard",
                    "--host",
                    "127.0.0.1",
                ],
                f"worker{i}",
            )
        with distributed.Client(address, timeout="30s") as client:
            client.wait_for_workers(2, timeout=START_SECONDS)
        yield address
    finally:
        for p in reversed(procs):
            p.terminate()
        for p in reversed(procs):
            try:
                p.wait(timeout=15)
            except subprocess.TimeoutExpired:
                p.kill()
                p.wait(timeout=5)


def test_scan_on_the_cluster_equals_the_serial_scan(cluster: str) -> None:
    frame = pd.read_csv(DEMO)
    serial = reviewer.scan(frame, "grade", id="lot_id", kernel="linear", C=1.0, jobs=1)
    far = reviewer.scan(frame, "grade", id="lot_id", kernel="linear", C=1.0, cluster=cluster)
    pd.testing.assert_frame_equal(far, serial, check_exact=False, rtol=0, atol=1e-9)
    assert far["heldout_margin"].notna().sum() == len(frame)


def test_rbf_probe_on_the_cluster_equals_the_serial_probe(cluster: str) -> None:
    frame = pd.read_csv(DEMO).iloc[:600]
    kw = dict(kernel="rbf", C=1.0, folds=3, rate=0.05, seed=2)
    serial = reviewer.probe(frame, "grade", id="lot_id", jobs=1, **kw)
    far = reviewer.probe(frame, "grade", id="lot_id", cluster=cluster, **kw)
    np.testing.assert_array_equal(far.ranks, serial.ranks)
    assert far.auroc == pytest.approx(serial.auroc, abs=1e-12)


def test_the_command_runs_on_the_cluster(cluster: str, tmp_path: Path) -> None:
    serial, far = tmp_path / "serial.csv", tmp_path / "far.csv"
    base = [sys.executable, "-m", "reviewer", "scan", str(DEMO), "--label", "grade"]
    base += ["--id", "lot_id", "--kernel", "linear", "--C", "1", "--quiet"]
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    subprocess.run([*base, "--out", str(serial), "--jobs", "1"], check=True, env=env, timeout=300)
    subprocess.run(
        [*base, "--out", str(far), "--cluster", cluster], check=True, env=env, timeout=300
    )
    a, b = pd.read_csv(serial), pd.read_csv(far)
    pd.testing.assert_frame_equal(b, a, check_exact=False, rtol=0, atol=1e-9)


def test_an_unreachable_scheduler_is_one_clear_error_within_the_timeout() -> None:
    frame = pd.read_csv(DEMO).iloc[:300]
    address = f"tcp://127.0.0.1:{_free_port()}"  # nothing listens there
    started = time.monotonic()
    with pytest.raises(SettingsError, match="cannot reach the Dask scheduler at tcp://127"):
        reviewer.scan(frame, "grade", id="lot_id", kernel="linear", C=1.0, cluster=address)
    assert time.monotonic() - started < 60  # bounded: the connect timeout, not a hang


def test_the_command_names_a_bad_address_in_one_line(tmp_path: Path) -> None:
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    command = [sys.executable, "-m", "reviewer", "scan", str(DEMO), "--label", "grade"]
    done = subprocess.run(
        [*command, "--cluster", "scheduler-host:8786", "--out", str(tmp_path / "o.csv")],
        capture_output=True,
        text=True,
        env=env,
        timeout=120,
    )
    assert done.returncode == 2
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error:") and "scheduler-host:8786" in lines[0]
    assert not (tmp_path / "o.csv").exists()
