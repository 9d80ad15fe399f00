"""Write the invented fresh-gas log of the demo (demo_cases/kestrel_audit_log.csv).

Kestrel Island District Hospital, its two theatres (Osprey and Tern), its anaesthetists' habits
and every case are invented. The log is drawn from a seeded random generator, so the same command
always writes the same file::

    uv run python demo_cases/make_audit_log.py

What it draws (all invented, for illustration only): weekday lists from 2026-01-05 for 13 weeks,
three or four cases a room a day, a sample every 5 minutes; sevoflurane in most cases, isoflurane
and desflurane in some, nitrous oxide in a few; a wash-in at 4-8 L/min, then a maintenance flow
that depends on who gives the anaesthetic (a minimal-flow habit near 0.5 L/min, a low-flow habit
near 1 L/min and a medium-flow habit near 2 L/min). Three rows are wrong on purpose (a negative
flow, an unknown agent, a time that is not a time) so the audit shows its rejection report.
"""

from __future__ import annotations

import csv
from datetime import datetime, timedelta, timezone
from pathlib import Path

import numpy as np

OUT = Path(__file__).resolve().parent / "kestrel_audit_log.csv"
SEED = 2026
ZONE = timezone(timedelta(hours=10))  # the invented island's time zone
HEADER = [
    "case_id",
    "time",
    "oxygen_flow [L/min]",
    "air_flow [L/min]",
    "nitrous_oxide_flow [L/min]",
    "agent",
    "vaporizer_setting [%]",
    "end_tidal_agent [%]",
    "inspired_oxygen [%]",
    "room",
    "patient_weight [kg]",
    "patient_age [year]",
    "note",
]
#: The file says what it is in its own column (the audit ignores columns it does not know).
NOTE = "invented demo log: Kestrel Island District Hospital is not a real hospital and no case is real"
ROOMS = ("Theatre Osprey", "Theatre Tern")
#: Maintenance flow habits [L/min]: (share of cases, mean total flow, SD).
HABITS = ((0.35, 0.5, 0.08), (0.40, 1.0, 0.15), (0.25, 2.0, 0.3))
#: Agent: (share, end-tidal for about 1 MAC at 40 years [%], highest dial [%]).
AGENTS = {"sevoflurane": (0.70, 1.8, 8.0), "isoflurane": (0.20, 1.17, 5.0), "desflurane": (0.10, 6.6, 18.0)}


def _case_rows(rng: np.random.Generator, case_id: str, start: datetime, room: str) -> tuple[list[list[str]], float]:
    """The samples of one case and its length [min]."""
    names = list(AGENTS)
    agent = names[rng.choice(len(names), p=[AGENTS[n][0] for n in names])]
    _, et_1mac, dial_max = AGENTS[agent]
    habit = HABITS[rng.choice(len(HABITS), p=[h[0] for h in HABITS])]
    nitrous = agent != "desflurane" and rng.random() < 0.12
    weight = float(np.clip(rng.normal(78, 16), 40, 160))
    age = float(np.clip(rng.normal(52, 17), 16, 92))
    length = float(np.clip(rng.lognormal(np.log(80), 0.45), 20, 300))
    wash_in = float(rng.uniform(5, 12))
    wash_flow = float(rng.uniform(4, 8))
    maint = float(max(0.3, rng.normal(habit[1], habit[2])))
    age_factor = 10 ** (-0.00269 * (age - 40))  # Mapleson 1996
    target = float(rng.uniform(0.8, 1.1))
    rows = []
    for t in np.arange(0.0, length + 1e-9, 5.0):
        total = wash_flow if t < wash_in else maint
        o2_share = 0.5 if total >= 3 else float(rng.uniform(0.5, 0.7))
        if nitrous:
            o2, air, n2o = total * max(o2_share, 0.34), 0.0, total * (1 - max(o2_share, 0.34))
        else:
            o2, air, n2o = total * o2_share, total * (1 - o2_share), 0.0
        # Dial a little above the end-tidal at high flow, well above it at low flow (common practice).
        rise = min(1.0, t / max(wash_in, 1.0))
        et = et_1mac * age_factor * target * (1.0 - 0.4 * nitrous) * (0.3 + 0.7 * rise)
        ratio = 1.3 if total >= 3 else 1.3 + 0.9 / total
        dial = min(dial_max, et * ratio * float(rng.uniform(0.95, 1.05)))
        # Recorded inspired O2 [%]: near the fresh-gas O2 share at high flow, lower at low flow where
        # the patient's O2 uptake weighs more (invented, not modelled); never below 25 %.
        fio2 = 100 * (0.5 + 0.5 * (o2 / total - 0.5)) if total >= 3 else 100 * (o2 / total - 0.12 / total)
        fio2 = max(30.0 if nitrous else 25.0, fio2)
        when = (start + timedelta(minutes=float(t))).isoformat(timespec="seconds")
        rows.append(
            [
                case_id,
                when,
                f"{o2:.2f}",
                f"{air:.2f}",
                f"{n2o:.2f}",
                agent,
                f"{dial:.1f}",
                f"{et:.2f}",
                f"{fio2:.0f}",
                room,
                f"{weight:.0f}",
                f"{age:.0f}",
                "",
            ]
        )
    return rows, length


def make_log(seed: int = SEED, weeks: int = 13) -> list[list[str]]:
    """All rows of the log (without the header), the three faulty rows included."""
    rng = np.random.default_rng(seed)
    rows: list[list[str]] = []
    day0 = datetime(2026, 1, 5, tzinfo=ZONE)  # a Monday
    n = 0
    for week in range(weeks):
        for weekday in range(5):
            day = day0 + timedelta(days=7 * week + weekday)
            for room in ROOMS:
                clock = day + timedelta(hours=8, minutes=float(rng.uniform(0, 20)))
                for _ in range(int(rng.integers(3, 5))):
                    n += 1
                    case_rows, length = _case_rows(rng, f"KID-{n:04d}", clock, room)
                    rows += case_rows
                    clock += timedelta(minutes=length + float(rng.uniform(20, 40)))
    # Faults on purpose, each in a different case: the audit must reject the row and say why.
    rows[40][2] = "-0.40"  # a negative oxygen flow
    rows[400][5] = "sevoflurene"  # a misspelt agent
    rows[800][1] = "later"  # a time that is not a time
    rows[0][-1] = NOTE
    return rows


def main() -> None:
    rows = make_log()
    with OUT.open("w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(HEADER)
        w.writerows(rows)
    print(f"wrote {OUT.name}: {len(rows)} rows")


if __name__ == "__main__":
    main()
