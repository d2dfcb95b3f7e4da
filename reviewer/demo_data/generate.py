"""Seeded generator for the invented green-coffee lot register used as demo data.

Run `python reviewer/demo_data/generate.py` to rewrite the CSV files beside this script, or import
`generate` to build a table in memory. Only the standard library, numpy and pandas are used,
so the files can be rebuilt without installing the project.
"""

from __future__ import annotations

import datetime as dt
import sys
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20260417
BINARY_SEED = 20260418
N_ROWS = 1800
N_ROWS_BINARY = 1200
PLANTED_RATE = 0.05

GRADES = ("specialty", "premium", "exchange")  # best to worst; neighbours are adjacent
GATES = ("accept", "reject")
LABEL_COLUMN = "grade"
BINARY_LABEL_COLUMN = "gate"
ID_COLUMN = "lot_id"

# Region -> (share of lots, altitude range in m, harvest window as (first month, months long)).
# Altitudes and seasons are rough, from memory; they only need to look plausible.
REGIONS: dict[str, tuple[float, tuple[int, int], tuple[int, int]]] = {
    "Ethiopia": (0.17, (1650, 2300), (10, 4)),
    "Kenya": (0.12, (1400, 2100), (10, 4)),
    "Colombia": (0.19, (1200, 2100), (9, 6)),
    "Guatemala": (0.12, (1100, 1900), (12, 4)),
    "Honduras": (0.11, (1000, 1700), (11, 5)),
    "Brazil": (0.19, (800, 1350), (5, 4)),
    "Indonesia": (0.10, (900, 1700), (6, 6)),
}

# Processing shares outside Indonesia; wet-hulled stays rare because only Indonesian lots use it.
PROCESSING_SHARES = {"washed": 0.52, "natural": 0.30, "honey": 0.18}
WET_HULLED_SHARE_INDONESIA = 0.30

# Latent cup-quality cut points, chosen so roughly 30% specialty, 44% premium, 26% exchange,
# and about 58% of lots pass the buyer's gate.
SPECIALTY_CUT = 0.85
EXCHANGE_CUT = -0.90
ACCEPT_CUT = -0.25
QUALITY_NOISE = 0.36
# The gate has one boundary instead of two, so it needs more blur to be about as hard to read.
BINARY_QUALITY_NOISE = 0.60

NOTE_WORDS = {
    "high": (
        "jasmine",
        "bergamot",
        "peach",
        "lime zest",
        "black tea",
        "honeysuckle",
        "red currant",
        "lemongrass",
    ),
    "mid": (
        "milk chocolate",
        "caramel",
        "hazelnut",
        "red apple",
        "brown sugar",
        "orange",
        "almond",
        "cocoa",
    ),
    "low": (
        "woody",
        "papery",
        "flat",
        "earthy",
        "rubbery",
        "grassy",
        "dull",
        "astringent",
    ),
}
NOTE_FINISH = {
    "high": ("clean sweet finish", "bright acidity", "juicy", "long finish"),
    "mid": ("round body", "balanced", "mild acidity", "smooth"),
    "low": ("short finish", "harsh aftertaste", "muted acidity", "heavy body"),
}
PROCESS_WORDS = {
    "natural": ("blueberry", "winey", "strawberry jam"),
    "honey": ("syrupy", "dried apricot"),
    "wet-hulled": ("cedar", "herbal", "tobacco"),
    "washed": (),
}


def _pick(rng: np.random.Generator, choices: tuple[str, ...]) -> str:
    return choices[int(rng.integers(len(choices)))]


def _features(rng: np.random.Generator, n_rows: int, season: int) -> pd.DataFrame:
    names = list(REGIONS)
    shares = np.array([REGIONS[r][0] for r in names])
    region = rng.choice(names, size=n_rows, p=shares / shares.sum())

    altitude = np.empty(n_rows)
    harvest = []
    for i, r in enumerate(region):
        lo, hi = REGIONS[r][1]
        altitude[i] = rng.uniform(lo, hi)
        first_month, span = REGIONS[r][2]
        # Harvest seasons of season/season+1; a day offset keeps dates scattered within the season.
        start = dt.date(season, first_month, 1)
        harvest.append(start + dt.timedelta(days=int(rng.integers(span * 30))))
    altitude = np.round(altitude / 10) * 10

    proc_names = list(PROCESSING_SHARES)
    proc_p = np.array(list(PROCESSING_SHARES.values()))
    processing = rng.choice(proc_names, size=n_rows, p=proc_p)
    indo = region == "Indonesia"
    wet = indo & (rng.random(n_rows) < WET_HULLED_SHARE_INDONESIA)
    processing = np.where(wet, "wet-hulled", processing).astype(object)

    alt_z = (altitude - 1500.0) / 400.0
    # Wet-hulled coffee leaves the farm wetter; natural a touch drier on average.
    moist_shift = np.select([processing == "wet-hulled", processing == "natural"], [0.9, -0.2], 0.0)
    moisture = np.clip(rng.normal(10.9 + moist_shift, 0.75), 9.0, 13.0).round(1)
    density = np.clip(rng.normal(688 + 22 * alt_z, 22), 620, 760).round()
    screen = np.clip(np.round(rng.normal(15.8 + 0.8 * alt_z, 1.2)), 13, 19).astype(int)
    # Defects are skewed: most lots are clean, a tail is badly sorted.
    defects = np.clip(np.round(rng.gamma(1.1, 7.5, size=n_rows)), 0, 80).astype(int)

    return pd.DataFrame(
        {
            "origin_region": region.astype(object),
            "harvest_date": [d.isoformat() for d in harvest],
            "processing": processing,
            "altitude_m": altitude,
            "moisture_pct": moisture,
            "bulk_density_g_l": density,
            "screen_size": screen,
            "defects_per_300g": defects,
        }
    )


def _quality(frame: pd.DataFrame) -> np.ndarray:
    """Noise-free latent cup quality; higher is better."""
    alt_z = (frame["altitude_m"].to_numpy() - 1500.0) / 400.0
    proc = frame["processing"].to_numpy()
    # Altitude helps with diminishing returns; naturals gain more from altitude and suffer more
    # low down (ferment risk in warm places), honey sits between, wet-hulled is flat and lower.
    slope = np.select(
        [proc == "natural", proc == "honey", proc == "wet-hulled"], [1.5, 1.1, 0.3], 0.85
    )
    offset = np.select([proc == "wet-hulled"], [-0.35], 0.0)
    altitude_part = slope * np.tanh(alt_z) + offset
    defects = frame["defects_per_300g"].to_numpy()
    defect_part = -0.95 * (np.log1p(defects) - 2.0)
    moisture = frame["moisture_pct"].to_numpy()
    # Beans drier or wetter than about 11% lose cup quality on both sides.
    moisture_part = -0.55 * (moisture - 11.0) ** 2 + 0.3
    density_part = 0.30 * (frame["bulk_density_g_l"].to_numpy() - 690.0) / 25.0
    screen_part = 0.12 * (frame["screen_size"].to_numpy() - 16.0)
    return altitude_part + defect_part + moisture_part + density_part + screen_part


def _grade(quality: np.ndarray, binary: bool) -> np.ndarray:
    if binary:
        return np.where(quality >= ACCEPT_CUT, GATES[0], GATES[1]).astype(object)
    return np.select(
        [quality >= SPECIALTY_CUT, quality >= EXCHANGE_CUT], [GRADES[0], GRADES[1]], GRADES[2]
    ).astype(object)


def _notes(rng: np.random.Generator, quality: np.ndarray, processing: np.ndarray) -> list[str]:
    notes = []
    for q, proc in zip(quality, processing, strict=True):
        # The note follows the cup itself, with some blur, not the grade written in the register.
        q_seen = q + rng.normal(0, 0.5)
        band = "high" if q_seen > SPECIALTY_CUT else "mid" if q_seen > EXCHANGE_CUT else "low"
        words = [_pick(rng, NOTE_WORDS[band])]
        extra = PROCESS_WORDS[proc]
        if extra and rng.random() < 0.5:
            words.append(_pick(rng, extra))
        else:
            second = _pick(rng, NOTE_WORDS[band])
            if second != words[0]:
                words.append(second)
        words.append(_pick(rng, NOTE_FINISH[band]))
        notes.append(", ".join(words))
    return notes


def _plant(
    rng: np.random.Generator, labels: np.ndarray, classes: tuple[str, ...], rate: float
) -> tuple[np.ndarray, np.ndarray]:
    """Pick rows to mislabel; return (row positions, wrong labels) sorted by position."""
    n_planted = round(rate * len(labels))
    rows = np.sort(rng.choice(len(labels), size=n_planted, replace=False))
    wrong = np.empty(n_planted, dtype=object)
    for j, row in enumerate(rows):
        k = classes.index(labels[row])
        if len(classes) == 2:
            wrong[j] = classes[1 - k]
            continue
        neighbours = [c for c in (k - 1, k + 1) if 0 <= c < len(classes)]
        # Most slips land on a neighbouring grade; about one in eight jumps two grades.
        far = [c for c in range(len(classes)) if abs(c - k) >= 2]
        if far and rng.random() < 0.125:
            wrong[j] = classes[_pick_index(rng, far)]
        else:
            wrong[j] = classes[_pick_index(rng, neighbours)]
    return rows, wrong


def _pick_index(rng: np.random.Generator, options: list[int]) -> int:
    return options[int(rng.integers(len(options)))]


def _blank_some(rng: np.random.Generator, frame: pd.DataFrame) -> pd.DataFrame:
    """Scatter about 2% missing values over a few measured columns."""
    for column, rate in (("moisture_pct", 0.02), ("bulk_density_g_l", 0.025), ("altitude_m", 0.02)):
        mask = rng.random(len(frame)) < rate
        frame.loc[mask, column] = np.nan
    return frame


def generate(
    n_rows: int = N_ROWS, seed: int = SEED, binary: bool = False
) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Build the lot register and its planted-error list.

    Returns (frame, planted). frame has one row per lot with label column `grade` (three grades)
    or `gate` (binary); planted has columns lot_id, true_label, given_label.
    """
    if n_rows < 20:
        raise ValueError(f"n_rows={n_rows}: need at least 20 lots to plant errors")
    rng = np.random.default_rng(seed)
    year = 2025 if binary else 2026
    frame = _features(rng, n_rows, season=year - 1)
    noise = BINARY_QUALITY_NOISE if binary else QUALITY_NOISE
    quality = _quality(frame) + rng.normal(0, noise, size=n_rows)
    true_labels = _grade(quality, binary)
    notes = _notes(rng, quality, frame["processing"].to_numpy())

    # Lot numbers are sparse and increasing, as in a register that also holds other goods.
    numbers = np.sort(rng.choice(np.arange(1, 100_000), size=n_rows, replace=False))
    ids = [f"GC-{year}-{k:05d}" for k in numbers]

    classes = GATES if binary else GRADES
    rows, wrong = _plant(rng, true_labels, classes, PLANTED_RATE)
    given = true_labels.copy()
    given[rows] = wrong

    frame = _blank_some(rng, frame)
    frame.insert(0, ID_COLUMN, ids)
    frame["cupper_note"] = notes
    frame[BINARY_LABEL_COLUMN if binary else LABEL_COLUMN] = given
    for column in ("altitude_m", "bulk_density_g_l"):
        frame[column] = frame[column].round().astype("Int64")
    frame = frame[
        [
            ID_COLUMN,
            "origin_region",
            "harvest_date",
            "processing",
            "altitude_m",
            "moisture_pct",
            "bulk_density_g_l",
            "screen_size",
            "defects_per_300g",
            "cupper_note",
            BINARY_LABEL_COLUMN if binary else LABEL_COLUMN,
        ]
    ]
    planted = pd.DataFrame(
        {
            "lot_id": [ids[r] for r in rows],
            "true_label": [true_labels[r] for r in rows],
            "given_label": list(wrong),
        }
    )
    return frame, planted


def _write_csv(frame: pd.DataFrame, path: Path) -> None:
    # Fixed line ending and encoding so the bytes match on every platform.
    frame.to_csv(path, index=False, lineterminator="\n", encoding="utf-8")


def write_all(out_dir: Path) -> list[Path]:
    """Write the four demo files into out_dir and return their paths."""
    out_dir.mkdir(parents=True, exist_ok=True)
    written = []
    for binary, n_rows, seed, data_name, planted_name in (
        (False, N_ROWS, SEED, "coffee_lots.csv", "planted_errors.csv"),
        (True, N_ROWS_BINARY, BINARY_SEED, "coffee_lots_binary.csv", "planted_errors_binary.csv"),
    ):
        frame, planted = generate(n_rows=n_rows, seed=seed, binary=binary)
        for table, name in ((frame, data_name), (planted, planted_name)):
            path = out_dir / name
            _write_csv(table, path)
            written.append(path)
    return written


def main(argv: list[str] | None = None) -> int:
    args = sys.argv[1:] if argv is None else argv
    out_dir = Path(args[0]) if args else Path(__file__).resolve().parent
    for path in write_all(out_dir):
        print(path)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
