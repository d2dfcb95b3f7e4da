"""Run every benchmark script: ``--smoke`` (the default, seconds each, into a temporary folder)
or ``--full`` (the real sizes, into tests/benchmarks/results/; long on 2 cores).

    python -m tests.benchmarks.run_all [--full] [--only speed,replay]

A benchmark script is any module in this folder with a ``--smoke`` option.
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]


def scripts() -> list[str]:
    """Every benchmark module here, found by its ``--smoke`` option."""
    found = []
    for path in sorted(HERE.glob("*.py")):
        if path.name.startswith(("test_", "_", "run_all")):
            continue
        if '"--smoke"' in path.read_text(encoding="utf-8"):
            found.append(path.stem)
    return found


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--full", action="store_true", help="real sizes into results/")
    parser.add_argument("--only", default="", help="comma-separated benchmark names")
    args = parser.parse_args(argv)
    names = scripts()
    assert names, f"no benchmark scripts with a --smoke option found in {HERE}"
    if args.only:
        wanted = set(args.only.split(","))
        names = [n for n in names if n in wanted]
    failed = []
    with tempfile.TemporaryDirectory() as tmp:
        for name in names:
            cmd = [sys.executable, "-m", f"tests.benchmarks.{name}"]
            if not args.full:
                cmd += ["--smoke", "--out-dir", str(Path(tmp) / name)]
            started = time.perf_counter()
            code = subprocess.call(cmd, cwd=ROOT)
            took = time.perf_counter() - started
            print(f"{name}: {'ok' if code == 0 else f'failed ({code})'} in {took:.1f} s")
            if code:
                failed.append(name)
    if failed:
        print(f"failed: {', '.join(failed)}")
    return 1 if failed else 0


if __name__ == "__main__":
    raise SystemExit(main())
