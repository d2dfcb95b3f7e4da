"""Seeded generator for the invented maintenance work orders used as the text demo.

A facilities team receives free-text work orders from the people in its buildings and routes
each to a trade. Run `python reviewer/demo_data/work_orders.py` to rewrite the two CSV files
beside this script, or import `generate` to build the table in memory. Only the standard
library, numpy and pandas are used.

The descriptions are built from per-trade templates with synonyms, shared vague words
("not working", "broken", "noise"), words that mislead (a leak from an air-conditioning unit
is HVAC, a dead light in a wet room may still be electrical), abbreviations, typos and
boilerplate, so reading the text decides most rows but not all.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20261203
N_ROWS = 3000
PLANTED_RATE = 0.05
ID_COLUMN = "order_id"
LABEL_COLUMN = "trade"
TEXT_COLUMN = "description"
DATA_FILE = "work_orders.csv"
PLANTED_FILE = "planted_errors_work_orders.csv"

TRADES = ("electrical", "plumbing", "hvac", "carpentry", "locksmith")
TRADE_SHARES = (0.27, 0.24, 0.22, 0.17, 0.10)
# Wrong labels are planted mostly where a hurried dispatcher would slip: the trade next door.
CONFUSED_WITH = {
    "electrical": ("hvac", "locksmith", "plumbing"),
    "plumbing": ("hvac", "carpentry", "electrical"),
    "hvac": ("electrical", "plumbing", "carpentry"),
    "carpentry": ("locksmith", "plumbing", "electrical"),
    "locksmith": ("carpentry", "electrical", "hvac"),
}

SITES = ("Harbour House", "Northgate Depot", "Riverside Campus", "Elm Street Clinic", "Old Mill")
SITE_SHARES = (0.26, 0.17, 0.28, 0.15, 0.14)
PRIORITIES = ("low", "normal", "urgent")
REPORTERS = ("tenant", "reception", "cleaning team", "security", "site manager", "staff")

# Per trade: things that fail, what is wrong with them, and extra words that belong there.
THINGS = {
    "electrical": (
        "socket",
        "plug socket",
        "power outlet",
        "light fitting",
        "ceiling light",
        "strip light",
        "fluorescent tube",
        "light switch",
        "fuse board",
        "breaker",
        "emergency light",
        "extension lead",
        "hand dryer",
        "exit sign",
    ),
    "plumbing": (
        "tap",
        "kitchen sink",
        "basin",
        "toilet",
        "cistern",
        "urinal",
        "shower",
        "drain",
        "water heater",
        "pipe",
        "waste pipe",
        "stopcock",
        "dishwasher feed",
    ),
    "hvac": (
        "air conditioning",
        "AC unit",
        "aircon",
        "radiator",
        "heating",
        "thermostat",
        "extractor fan",
        "ventilation",
        "air handling unit",
        "boiler",
        "fan coil",
        "vent",
    ),
    "carpentry": (
        "door",
        "fire door",
        "cupboard door",
        "shelf",
        "skirting board",
        "window frame",
        "desk",
        "floorboard",
        "handrail",
        "kitchen unit",
        "door frame",
        "ceiling tile",
    ),
    "locksmith": (
        "lock",
        "door lock",
        "key",
        "padlock",
        "keypad",
        "card reader",
        "locker",
        "deadlock",
        "latch",
        "key safe",
    ),
}
FAULTS = {
    "electrical": (
        "no power",
        "keeps tripping",
        "flickering",
        "sparking",
        "dead",
        "buzzing",
        "burning smell",
        "scorch marks",
        "tripped the breaker",
        "out",
        "blown",
        "intermittent",
    ),
    "plumbing": (
        "leaking",
        "dripping",
        "blocked",
        "overflowing",
        "no hot water",
        "low water pressure",
        "won't flush",
        "running constantly",
        "smells of sewage",
        "backing up",
        "burst",
    ),
    "hvac": (
        "blowing warm air",
        "too cold",
        "too hot",
        "not heating",
        "rattling",
        "dripping condensate",
        "error code on display",
        "stuck on",
        "no airflow",
        "making a loud hum",
        "cold",
        "not cooling",
    ),
    "carpentry": (
        "hinge broken",
        "sticking",
        "won't close",
        "split",
        "loose",
        "came away from the wall",
        "warped",
        "splintered",
        "collapsed",
        "rotten",
        "wobbly",
        "squeaking",
    ),
    "locksmith": (
        "jammed",
        "key snapped inside",
        "won't turn",
        "lost keys",
        "code not accepted",
        "stiff",
        "not locking",
        "broken cylinder",
        "needs a new key cut",
        "locked out",
    ),
}
PLACES = (
    "in the kitchen",
    "in room {room}",
    "on the {floor_name} floor landing",
    "in the gents",
    "in the ladies",
    "in the plant room",
    "in the meeting room",
    "by reception",
    "in the corridor outside {room}",
    "in the stairwell",
    "in the server room",
    "in the canteen",
    "at the loading bay",
    "in the open plan office",
)
# Vague words every trade shares, so no single word decides.
VAGUE = (
    "not working",
    "broken",
    "faulty",
    "making a noise",
    "needs looking at",
    "playing up",
    "damaged",
    "again",
)
# Words that point at a trade the order is not for (a wet light is still electrical).
MISLEADING = {
    "electrical": ("near the sink", "water nearby", "next to the radiator", "by the fire door"),
    "plumbing": ("under the light", "behind the socket", "next to the boiler", "under the desk"),
    "hvac": ("water on the floor", "near the light switch", "above the door", "leaking water"),
    "carpentry": ("by the radiator", "near the socket", "under the sink", "lock ok"),
    "locksmith": ("door frame fine", "light out in corridor too", "near the tap", "door sticks"),
}
# Things more than one trade looks after: the words around them have to decide.
SHARED_THINGS = {
    "door": ("carpentry", "locksmith"),
    "front door": ("carpentry", "locksmith"),
    "window": ("carpentry", "locksmith"),
    "water heater": ("plumbing", "electrical", "hvac"),
    "fan": ("electrical", "hvac"),
    "pipework": ("plumbing", "hvac"),
    "hand dryer": ("electrical", "plumbing"),
    "boiler": ("hvac", "plumbing"),
    "shutter": ("locksmith", "carpentry", "electrical"),
    "unit": ("hvac", "carpentry", "electrical"),
}
OPENERS = (
    "",
    "",
    "",
    "Hi, ",
    "Please can someone look at: ",
    "Reported by {reporter}: ",
    "URGENT ",
    "pls ",
    "Hello team, ",
    "Follow up to earlier call - ",
)
CLOSERS = (
    "",
    "",
    "",
    ".",
    ". Thanks",
    ", thanks.",
    ". Access via reception.",
    ". Staff are working around it.",
    ". Second time this month.",
    ". Please attend asap.",
    " - photos on request.",
    ". Out of hours ok.",
)
TYPOS = {
    "leaking": "leeking",
    "ceiling": "cieling",
    "thermostat": "thermastat",
    "radiator": "radiater",
    "broken": "brokn",
    "working": "workng",
    "toilet": "toliet",
    "socket": "sockit",
    "cupboard": "cupbaord",
    "jammed": "jamed",
}
ABBREVIATIONS = {"air conditioning": "a/c", "light fitting": "lt fitting", "room": "rm"}
FLOOR_NAMES = {-1: "basement", 0: "ground", 1: "first", 2: "second", 3: "third", 4: "fourth"}


def _pick(rng: np.random.Generator, options: tuple[str, ...]) -> str:
    return options[int(rng.integers(len(options)))]


def _describe(rng: np.random.Generator, trade: str, floor: int, reporter: str) -> str:
    """One work order's free text for ``trade``."""
    shared = tuple(k for k, v in SHARED_THINGS.items() if trade in v)
    if shared and rng.random() < 0.3:
        thing = _pick(rng, shared)
    else:
        thing = _pick(rng, THINGS[trade])
    fault = _pick(rng, FAULTS[trade]) if rng.random() < 0.62 else _pick(rng, VAGUE)
    room = f"{floor if floor >= 0 else 'B'}.{int(rng.integers(1, 40)):02d}"
    place = _pick(rng, PLACES).format(room=room, floor_name=FLOOR_NAMES.get(floor, f"{floor}th"))
    shape = rng.random()
    if shape < 0.35:
        body = f"{thing} {fault} {place}"
    elif shape < 0.6:
        body = f"{place} the {thing}: {fault}"
    elif shape < 0.8:
        body = f"{fault.capitalize()} - {thing} {place}"
    else:
        # Terse, the way a phone message gets typed up.
        body = f"{thing} {fault}"
    if rng.random() < 0.25:
        body += f", {_pick(rng, VAGUE)}"
    if rng.random() < 0.3:
        body += f", {_pick(rng, MISLEADING[trade])}"
    if rng.random() < 0.12:
        # A second thing of the same trade.
        body += f"; also the {_pick(rng, THINGS[trade])} {_pick(rng, FAULTS[trade])}"
    text = _pick(rng, OPENERS).format(reporter=reporter) + body + _pick(rng, CLOSERS)
    text = text[0].upper() + text[1:]
    for word, short in ABBREVIATIONS.items():
        if word in text and rng.random() < 0.3:
            text = text.replace(word, short, 1)
    for word, typo in TYPOS.items():
        if word in text and rng.random() < 0.15:
            text = text.replace(word, typo, 1)
    if rng.random() < 0.1:
        text = text.lower()
    return text


def _plant(
    rng: np.random.Generator, true_labels: np.ndarray, rate: float
) -> tuple[np.ndarray, list[str]]:
    n = len(true_labels)
    rows = np.sort(rng.choice(n, size=round(rate * n), replace=False))
    wrong = []
    for r in rows:
        near = CONFUSED_WITH[str(true_labels[r])]
        wrong.append(near[0] if rng.random() < 0.6 else _pick(rng, near[1:]))
    return rows, wrong


def generate(n_rows: int = N_ROWS, seed: int = SEED) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The work-order table (given, partly wrong trades) and the list of planted rows."""
    rng = np.random.default_rng(seed)
    trades = rng.choice(len(TRADES), size=n_rows, p=TRADE_SHARES)
    true_labels = np.array([TRADES[t] for t in trades], dtype=object)
    site_idx = rng.choice(len(SITES), size=n_rows, p=SITE_SHARES)
    sites = [SITES[s] for s in site_idx]
    # Plant rooms sit low and HVAC kit on the roof floors: the floor says a little.
    floors = rng.integers(-1, 6, size=n_rows)
    low = (true_labels == "hvac") & (rng.random(n_rows) < 0.25)
    floors[low] = rng.choice([-1, 5], size=int(low.sum()))
    priority_p = {
        "electrical": (0.2, 0.5, 0.3),
        "plumbing": (0.2, 0.5, 0.3),
        "hvac": (0.25, 0.55, 0.2),
        "carpentry": (0.45, 0.45, 0.1),
        "locksmith": (0.2, 0.45, 0.35),
    }
    priorities = [PRIORITIES[rng.choice(3, p=priority_p[str(t)])] for t in true_labels]
    reporters = [_pick(rng, REPORTERS) for _ in range(n_rows)]
    texts = [
        _describe(rng, str(t), int(f), rep)
        for t, f, rep in zip(true_labels, floors, reporters, strict=True)
    ]
    days = rng.integers(0, 365, size=n_rows)
    opened = (pd.Timestamp("2026-01-01") + pd.to_timedelta(np.sort(days), unit="D")).strftime(
        "%Y-%m-%d"
    )
    ids = [f"WO-{26000 + i:05d}" for i in range(n_rows)]
    rows, wrong = _plant(rng, true_labels, PLANTED_RATE)
    given = true_labels.copy()
    given[rows] = wrong
    frame = pd.DataFrame(
        {
            ID_COLUMN: ids,
            "opened_on": list(opened),
            "site": sites,
            "floor": floors,
            "priority": priorities,
            "reported_by": reporters,
            TEXT_COLUMN: texts,
            LABEL_COLUMN: given,
        }
    )
    planted = pd.DataFrame(
        {
            ID_COLUMN: [ids[r] for r in rows],
            "true_label": [true_labels[r] for r in rows],
            "given_label": list(wrong),
        }
    )
    return frame, planted


def write_all(out_dir: Path) -> list[Path]:
    """Write the work orders and their planted list into out_dir; return the paths."""
    out_dir.mkdir(parents=True, exist_ok=True)
    frame, planted = generate()
    written = []
    for table, name in ((frame, DATA_FILE), (planted, PLANTED_FILE)):
        path = out_dir / name
        # Fixed line ending and encoding so the bytes match on every platform.
        table.to_csv(path, index=False, lineterminator="\n", encoding="utf-8")
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
