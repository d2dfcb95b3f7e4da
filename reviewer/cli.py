"""The ``margin-reviewer`` command. Calls reviewer.core only; the window is imported lazily."""

from __future__ import annotations

import argparse
import os
import sys
import time
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

from reviewer._version import __version__

DEMO_DIR = Path(__file__).resolve().parent / "demo_data"


class _Parser(argparse.ArgumentParser):
    """argparse, but usage errors also follow the one-line ``error:`` rule and exit 2."""

    def error(self, message: str) -> None:  # type: ignore[override]
        sys.stderr.write(f"error: {message}\n")
        raise SystemExit(2)


def _gamma(text: str) -> float | str:
    if text == "scale":
        return text
    try:
        return float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"gamma must be a number or 'scale', got {text!r}"
        ) from None


def _positive_float(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number, got {text!r}") from None
    return value


def _jobs(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"must be at least 1, got {value}")
    return value


def _add_where(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "--jobs",
        type=_jobs,
        default=None,
        help="run the held-out folds on N cores at once (default: every usable core); "
        "the results are the same for any N",
    )
    p.add_argument(
        "--cluster",
        metavar="tcp://HOST:PORT",
        help="run the held-out folds on the workers of this Dask scheduler "
        "(needs margin-reviewer[cluster]); the results are the same as on one machine",
    )


def _role(text: str) -> tuple[str, str]:
    column, sep, kind = text.rpartition("=")
    if not sep or not column.strip() or not kind.strip():
        raise argparse.ArgumentTypeError(
            f"expected COLUMN=KIND (kind: numeric, categorical, text, vector or ignore), "
            f"got {text!r}"
        )
    return column.strip(), kind.strip().lower()


def _add_data_options(p: argparse.ArgumentParser, *, roles: bool = True) -> None:
    """--role and --vectors, shared by scan, probe and open."""
    if roles:
        p.add_argument(
            "--role",
            dest="roles",
            action="append",
            type=_role,
            default=[],
            metavar="COLUMN=KIND",
            help="set a column's kind: numeric, categorical, text, vector or ignore (repeatable)",
        )
    p.add_argument(
        "--vectors",
        metavar="FILE",
        help="a .npy file of shape (rows, d): one vector per table row, in row order, "
        "used as features",
    )


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog="margin-reviewer",
        description="Rank the rows of a labelled table by soft-margin slack and review them.",
    )
    parser.add_argument("--version", action="version", version=f"margin-reviewer {__version__}")
    sub = parser.add_subparsers(dest="command", parser_class=_Parser)

    p_demo = sub.add_parser("demo", help="open the window on the bundled demo data")
    p_demo.add_argument(
        "--text",
        action="store_true",
        help="the text demo: maintenance work orders routed to a trade by their description",
    )

    p_open = sub.add_parser("open", help="open the window on a data file")
    p_open.add_argument("data", nargs="?", help="CSV, TSV, Parquet or Excel file")
    p_open.add_argument("--label", help="the label column")
    p_open.add_argument("--id", dest="id_column", help="the id column")
    p_open.add_argument("--session", help="session file (default: beside the data file)")
    _add_data_options(p_open, roles=False)

    p_scan = sub.add_parser("scan", help="rank rows by slack and write one row per input row")
    p_scan.add_argument("data")
    p_scan.add_argument("--label", required=True, help="the label column")
    p_scan.add_argument("--id", dest="id_column", help="the id column")
    p_scan.add_argument("--kernel", default="auto", choices=["auto", "linear", "rbf", "poly"])
    p_scan.add_argument(
        "--C", dest="C", type=_positive_float, default=None, help="penalty C (default: auto)"
    )
    p_scan.add_argument("--gamma", type=_gamma, default="scale")
    p_scan.add_argument("--degree", type=int, default=3, help="poly kernel degree")
    p_scan.add_argument("--class-weight", choices=["none", "balanced"], default="none")
    p_scan.add_argument("--folds", type=int, default=5, help="held-out folds; 0 turns it off")
    p_scan.add_argument("--score", choices=["heldout", "training"], default="heldout")
    p_scan.add_argument("--seed", type=int, default=0)
    _add_where(p_scan)
    p_scan.add_argument("--sheet", help="the workbook sheet to read (default: the first)")
    p_scan.add_argument("--summary", help="also write the run's summary as JSON to this file")
    p_scan.add_argument(
        "--quiet", action="store_true", help="no progress bar and no summary on standard error"
    )
    p_scan.add_argument(
        "--treat-as-classes",
        action="store_true",
        help="review a numeric label with many distinct values as classes anyway",
    )
    _add_data_options(p_scan)
    p_scan.add_argument(
        "--out",
        help="output file: CSV, or Parquet when it ends in .parquet (default: standard output); "
        "an earlier output is replaced, the input never",
    )

    p_probe = sub.add_parser(
        "probe", help="plant known label flips in a copy and report how many the ranking finds"
    )
    p_probe.add_argument("data")
    p_probe.add_argument("--label", required=True, help="the label column")
    p_probe.add_argument("--id", dest="id_column", help="the id column")
    p_probe.add_argument(
        "--rate", type=float, default=0.05, help="share of labelled rows to flip (default 0.05)"
    )
    p_probe.add_argument("--seed", type=int, default=0, help="seed for the flips and the fit")
    p_probe.add_argument("--kernel", default="auto", choices=["auto", "linear", "rbf", "poly"])
    p_probe.add_argument(
        "--C", dest="C", type=_positive_float, default=None, help="penalty C (default: auto)"
    )
    p_probe.add_argument("--folds", type=int, default=5, help="held-out folds; 0 turns it off")
    _add_where(p_probe)
    p_probe.add_argument("--out", help="also write the result as JSON to this file")
    p_probe.add_argument("--sheet", help="the workbook sheet to read (default: the first)")
    p_probe.add_argument("--quiet", action="store_true", help="no progress bar on standard error")
    p_probe.add_argument(
        "--treat-as-classes",
        action="store_true",
        help="review a numeric label with many distinct values as classes anyway",
    )
    _add_data_options(p_probe)

    p_export = sub.add_parser("export", help="write the cleaned table, audit log and summary")
    p_export.add_argument("session")
    p_export.add_argument("--out", required=True, help="cleaned table, in the source's format")
    p_export.add_argument("--audit", help="audit log (.csv or .jsonl)")
    p_export.add_argument("--report", help="HTML summary")
    p_export.add_argument(
        "--keep-excluded", action="store_true", help="keep excluded rows, flagged"
    )
    p_export.add_argument("--overwrite", action="store_true", help="replace existing output files")

    p_verify = sub.add_parser(
        "verify", help="check that an export's files are the ones its manifest lists"
    )
    p_verify.add_argument("export", help="the cleaned file, or its .manifest.json")
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    from reviewer.core.errors import ReviewerError

    try:
        if args.command == "scan":
            return _scan(args)
        if args.command == "export":
            return _export(args)
        if args.command == "probe":
            return _probe(args)
        if args.command == "verify":
            return _verify(args)
        if args.command in ("demo", "open", None):
            return _window(args)
    except ReviewerError as exc:
        sys.stderr.write(f"error: {_one_line(str(exc))}\n")
        return 2
    except KeyboardInterrupt:
        sys.stderr.write("error: interrupted\n")
        return 130
    except MemoryError:
        sys.stderr.write("error: out of memory while working on the table\n")
        return 2
    parser.print_help()
    return 2


TABLE_COMMANDS = ("scan", "probe", "export", "verify")


def run(argv: Sequence[str] | None = None) -> None:
    """The command's entry point: ``main``, then, for the commands that work on tables,
    leave without the interpreter's teardown once every output is written and flushed.
    With a Parquet file read, that teardown aborted the process now and then ("terminate
    called without an active exception", exit status 134, about 1 run in 10 to 20 of a scan
    refused after loading; seen with the code before this change too), which would turn a
    clean exit code into a crash. Files are written atomically and locks are released by
    the operating system, so nothing is lost by skipping it. The window keeps its ordinary
    exit."""
    words = list(sys.argv[1:] if argv is None else argv)
    code = main(words)
    if words and words[0] in TABLE_COMMANDS:
        sys.stdout.flush()
        sys.stderr.flush()
        os._exit(code)
    raise SystemExit(code)


def _one_line(text: str) -> str:
    return " ".join(text.split())


def _scan(args: argparse.Namespace) -> int:
    from reviewer.core.door import (
        check_address,
        check_scan_target,
        scan_file,
        write_scan_stream,
        write_scan_table,
    )
    from reviewer.core.values import FitSettings

    started = time.perf_counter()
    settings = FitSettings(
        kernel=args.kernel,
        C=args.C,
        gamma=args.gamma,
        degree=args.degree,
        class_weight=None if args.class_weight == "none" else "balanced",
        folds=args.folds,
        seed=args.seed,
        score=args.score,
    ).validate()
    cluster = check_address(args.cluster) if args.cluster else None
    if args.out:
        check_scan_target(args.out, protect=[Path(args.data)])
    if args.summary:
        check_scan_target(args.summary, protect=[Path(args.data)])
    with _progress_bar(args) as progress:
        outcome = scan_file(
            args.data,
            args.label,
            id_column=args.id_column,
            settings=settings,
            treat_as_classes=args.treat_as_classes,
            sheet=args.sheet,
            overrides=_overrides(args),
            vectors=args.vectors,
            progress=progress,
            jobs=args.jobs,
            cluster=cluster,
        )
    table = outcome.table
    if args.out:
        write_scan_table(table, args.out, protect=[Path(args.data)])
    else:
        write_scan_stream(table, sys.stdout)
    s = outcome.fit.summary
    used = outcome.fit.settings
    zones = ", ".join(f"{k} {v}" for k, v in s.zone_counts.items())
    gamma = f", gamma={used.gamma_value:.4g}" if used.kernel != "linear" else ""
    lines = [
        f"rows: {s.n_rows} ({s.n_fitted} fitted, {s.n_unlabelled} unlabelled)",
        f"classes: {', '.join(f'{c} ({n})' for c, n in s.class_counts.items())}",
        f"zones: {zones}",
        *_column_lines(outcome.roles, outcome.feature_names, args.vectors),
        f"settings: kernel={used.kernel}, C={float(used.C or 0):g}{gamma}, folds={used.folds}, "
        f"score={used.score}",
        *[f"note: {n}" for n in s.notes],
        f"time: {time.perf_counter() - started:.2f} s",
    ]
    if args.summary:
        _write_summary(args, outcome, time.perf_counter() - started)
    if not args.quiet:
        sys.stderr.write("\n".join(lines) + "\n")
    return 0


def _write_summary(args: argparse.Namespace, outcome: Any, seconds: float) -> None:
    """The run's summary as JSON, for pipelines (keys listed in the README)."""
    import json

    from reviewer.core.door import write_text

    s, roles = outcome.fit.summary, outcome.roles
    doc = {
        "data": str(Path(args.data).resolve()),
        "label": args.label,
        "id": args.id_column,
        "rows": s.n_rows,
        "fitted": s.n_fitted,
        "unlabelled": s.n_unlabelled,
        "classes": s.class_counts,
        "zones": s.zone_counts,
        "supports": s.support_counts,
        "settings": outcome.fit.settings.to_dict(),
        "heldout_accuracy": s.heldout_accuracy,
        "heldout_balanced_accuracy": s.heldout_balanced_accuracy,
        "columns": {
            **{c: "numeric" for c in roles.numeric},
            **{c: "categorical" for c in roles.categorical},
            **{c: "text" for c in roles.text},
            **{c: "vector" for c in roles.vector},
            **{c: f"ignored: {why}" for c, why in roles.ignored.items()},
        },
        "vectors": str(Path(args.vectors).resolve()) if args.vectors else None,
        "features": len(outcome.feature_names),
        "feature_nonzeros": outcome.nonzeros,
        "notes": list(s.notes),
        "out": str(Path(args.out).resolve()) if args.out else None,
        "seconds": round(seconds, 3),
    }
    write_text(args.summary, json.dumps(doc, indent=1, default=str) + "\n", protect=[args.data])


class _progress_bar:
    """A progress bar on standard error when it is a terminal (and not --quiet); else nothing."""

    def __init__(self, args: argparse.Namespace) -> None:
        self.enabled = sys.stderr.isatty() and not getattr(args, "quiet", False)
        self.bar: Any = None

    def __enter__(self) -> Callable[[float, str], None] | None:
        if not self.enabled:
            return None
        import shutil

        from tqdm import tqdm

        # A terminal that reports no size (some pseudo-terminals) would hide the bar.
        size = shutil.get_terminal_size((80, 24))
        self.bar = tqdm(
            total=1000,
            file=sys.stderr,
            leave=False,
            ncols=max(40, size.columns or 80),
            nrows=max(2, size.lines or 24),
            bar_format="{desc} {bar} {percentage:3.0f}%",
        )
        return self.update

    def update(self, fraction: float, message: str) -> None:
        self.bar.n = int(max(0.0, min(1.0, fraction)) * 1000)
        if message:
            self.bar.set_description_str(message[:48], refresh=False)
        self.bar.refresh()

    def __exit__(self, *exc: object) -> None:
        if self.bar is not None:
            self.bar.close()


def _column_lines(
    roles: object, feature_names: Sequence[str] = (), vectors: str | None = None
) -> list[str]:
    """One summary line per column kind (text and vector columns with the number of
    features they give); ignored columns with their reasons; the vectors file."""
    names = list(feature_names)

    def width(col: str, kind: str) -> str:
        prefix = f"{col}::" if kind == "text" else f"{col}["
        n = sum(1 for f in names if f.startswith(prefix))
        return f"{col} ({n:,} features)" if names else col

    kinds = [
        ("label", [getattr(roles, "label", None)]),
        ("id", [getattr(roles, "id", None)]),
        ("numeric", list(getattr(roles, "numeric", []))),
        ("categorical", list(getattr(roles, "categorical", []))),
        ("text", [width(c, "text") for c in getattr(roles, "text", [])]),
        ("vector", [width(c, "vector") for c in getattr(roles, "vector", [])]),
    ]
    lines = [f"{kind}: {', '.join(map(str, cols))}" for kind, cols in kinds if any(cols)]
    lines += [f"ignored: {col} ({why})" for col, why in getattr(roles, "ignored", {}).items()]
    if vectors:
        n = sum(1 for f in names if f.startswith("vectors["))
        lines.append(f"vectors: {vectors} ({n:,} features)")
    return lines


def _overrides(args: argparse.Namespace) -> dict[str, str]:
    """--role choices as column -> kind; a column named twice is refused."""
    out: dict[str, str] = {}
    for column, kind in getattr(args, "roles", []) or []:
        if column in out and out[column] != kind:
            from reviewer.core.errors import SettingsError

            raise SettingsError(
                f"--role: column {column!r} is given two kinds ({out[column]}, {kind})"
            )
        out[column] = kind
    return out


def _probe(args: argparse.Namespace) -> int:
    import json

    from reviewer.core.door import (
        check_address,
        check_scan_target,
        format_probe,
        probe_file,
        write_text,
    )
    from reviewer.core.values import FitSettings

    started = time.perf_counter()
    settings = FitSettings(
        kernel=args.kernel, C=args.C, folds=args.folds, seed=args.seed
    ).validate()
    cluster = check_address(args.cluster) if args.cluster else None
    if args.out:
        check_scan_target(args.out, protect=[Path(args.data)])
    with _progress_bar(args) as progress:
        result = probe_file(
            args.data,
            args.label,
            id_column=args.id_column,
            settings=settings,
            rate=args.rate,
            seed=args.seed,
            treat_as_classes=args.treat_as_classes,
            sheet=args.sheet,
            overrides=_overrides(args),
            vectors=args.vectors,
            progress=progress,
            jobs=args.jobs,
            cluster=cluster,
        )
    sys.stdout.write(format_probe(result) + "\n")
    if args.out:
        write_text(args.out, json.dumps(result.to_dict(), indent=1), protect=[args.data])
    if not args.quiet:
        sys.stderr.write(f"time: {time.perf_counter() - started:.2f} s\n")
    return 0


def _warn(message: str) -> None:
    sys.stderr.write(f"warning: {_one_line(message)}\n")


def _export(args: argparse.Namespace) -> int:
    from reviewer.core.door import export_session

    written = export_session(
        Path(args.session),
        out=Path(args.out),
        audit=Path(args.audit) if args.audit else None,
        report=Path(args.report) if args.report else None,
        keep_excluded=args.keep_excluded,
        overwrite=args.overwrite,
        on_warning=_warn,
    )
    for path in written:
        sys.stderr.write(f"wrote {path}\n")
    return 0


def _verify(args: argparse.Namespace) -> int:
    from reviewer.core.door import manifest_path_for, verify_manifest

    given = Path(args.export)
    manifest = given if given.name.endswith(".manifest.json") else manifest_path_for(given)
    problems = verify_manifest(manifest)
    if problems:
        sys.stderr.write(f"error: {manifest}: " + "; ".join(problems) + "\n")
        return 2
    sys.stderr.write(f"ok: every file listed in {manifest} is as the export wrote it\n")
    return 0


def _window(args: argparse.Namespace) -> int:
    try:
        from reviewer.gui.app import run_window
    except ImportError as exc:  # Qt missing or broken: say so in one line
        sys.stderr.write(f"error: the window cannot start ({exc})\n")
        return 2
    if args.command == "demo":
        if args.text:
            return run_window(
                DEMO_DIR / "work_orders.csv", label="trade", id_column="order_id", demo=True
            )
        from reviewer.demo_data import COFFEE_DEMO_ROLES

        return run_window(
            DEMO_DIR / "coffee_lots.csv",
            label="grade",
            id_column="lot_id",
            demo=True,
            overrides=dict(COFFEE_DEMO_ROLES),
        )
    if args.command == "open" and args.data:
        return run_window(
            Path(args.data),
            label=args.label,
            id_column=args.id_column,
            session=args.session,
            vectors=Path(args.vectors) if args.vectors else None,
        )
    return run_window(None)
