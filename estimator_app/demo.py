"""Built-in demo inputs. The site, the case, the stocks, the log and every price are invented."""

from __future__ import annotations

import copy
from typing import Any

#: The case the app opens on: an invented district hospital and an invented laparoscopic case.
DEMO_SCENARIO: dict[str, Any] = {
    "title": "Harbourside District Hospital - laparoscopic cholecystectomy",
    "notes": "Demo case, invented for illustration. Wash-in 6 L/min for 8 min, then 0.6 L/min "
    "with an end-tidal hold of 1 MAC, then emergence on oxygen.",
    "patient": {"weight": "82 kg", "age": "54 years"},
    "agent": {"name": "sevoflurane"},
    "circuit": {"volume": "6 L", "leak": "0.05 L/min", "sample_flow": "0.2 L/min", "sample_returned": True},
    "phases": [
        {"label": "wash-in", "duration": "8 min", "oxygen": "3 L/min", "air": "3 L/min", "end_tidal_target": "1 MAC"},
        {
            "label": "maintenance",
            "duration": "62 min",
            "oxygen": "0.4 L/min",
            "air": "0.2 L/min",
            "end_tidal_target": "1 MAC",
        },
        {"label": "emergence", "duration": "8 min", "oxygen": "6 L/min", "vaporizer": "0 %"},
    ],
    # Invented prices in an invented currency label: for the demo only.
    "prices": {
        "currency": "demo credits",
        "agent_bottle": 96.0,
        "bottle_volume": "250 mL",
        "oxygen_per_m3": 3.1,
        "air_per_m3": 1.4,
        "nitrous_oxide_per_m3": 21.0,
        "absorbent_per_kg": 7.5,
    },
}

#: Invented stocks of the same invented hospital's day-surgery theatre.
DEMO_INVENTORY: dict[str, Any] = {
    "title": "Harbourside District Hospital - day-surgery theatre 2",
    "plan": {"lead_time": "7 days", "safety_stock": "2 days"},
    "demand": {
        "working_days_per_week": 5,
        "day_start": "08:00",
        "cases": [{"name": "planned case", "scenario": "case planner", "per_day": 5}],
        "continuous": [
            {
                "name": "recovery oxygen",
                "gas": "oxygen",
                "flow": "2 L/min",
                "hours_per_day": "9 h",
                "start": "09:00",
                "days_per_week": 5,
            }
        ],
    },
    "cylinders": [
        {
            "name": "O2 manifold",
            "gas": "oxygen",
            "water_capacity": "50 L",
            "pressure": "137 bar",
            "reserve_pressure": "10 bar",
            "count": 2,
        },
        {
            "name": "O2 theatre spare",
            "gas": "oxygen",
            "water_capacity": "10 L",
            "pressure": "200 bar",
            "reserve_pressure": "10 bar",
            "count": 1,
        },
        {
            "name": "Air bank",
            "gas": "air",
            "water_capacity": "50 L",
            "pressure": "200 bar",
            "reserve_pressure": "10 bar",
            "count": 1,
        },
    ],
    "bottles": [{"agent": "sevoflurane", "count": 4, "volume": "250 mL"}],
    "concentrators": [],
    "absorbent": {"stock": "10 kg"},
}


#: Invented case mix of the same invented hospital; "case_planner.toml" is the planner's case.
DEMO_CASEMIX: dict[str, Any] = {
    "title": "Harbourside District Hospital - main theatres",
    "weeks": 104,
    "seed": 2026,
    "cover": "95 %",
    "case_types": [
        {
            "name": "laparoscopic (the planned case)",
            "per_week": 12,
            "scenario": "case_planner.toml",
            "duration_median": "80 min",
            "duration_p90": "130 min",
            "weight_mean": "82 kg",
            "weight_sd": "16 kg",
        },
        {
            "name": "day-case arthroscopy",
            "per_week": 15,
            "agent": "sevoflurane",
            "wash_in_flow": "6 L/min",
            "wash_in_time": "6 min",
            "maintenance_flow": "0.8 L/min",
            "oxygen_fraction": "65 %",
            "end_tidal_target": "1 MAC",
            "duration_median": "40 min",
            "duration_p90": "65 min",
            "weight_mean": "78 kg",
            "weight_sd": "14 kg",
        },
        {
            "name": "emergency list",
            "per_week": 6,
            "agent": "isoflurane",
            "wash_in_flow": "6 L/min",
            "wash_in_time": "10 min",
            "maintenance_flow": "1.5 L/min",
            "oxygen_fraction": "50 %",
            "end_tidal_target": "1 MAC",
            "duration_median": "95 min",
            "duration_p90": "160 min",
            "weight_mean": "75 kg",
            "weight_sd": "18 kg",
        },
    ],
    "orders": {
        "bottle_volume": "250 mL",
        "absorbent_pack": "5 kg",
        "oxygen_cylinder": {"water_capacity": "50 L", "pressure": "137 bar", "reserve_pressure": "10 bar"},
        "air_cylinder": {"water_capacity": "50 L", "pressure": "200 bar", "reserve_pressure": "10 bar"},
    },
    "prices": {
        "currency": "demo credits",
        "oxygen_per_m3": 3.1,
        "air_per_m3": 1.4,
        "absorbent_per_kg": 7.5,
        "agents": {
            "sevoflurane": {"agent_bottle": 96.0, "bottle_volume": "250 mL"},
            "isoflurane": {"agent_per_ml": 0.11},
        },
    },
}


def casemix() -> dict[str, Any]:
    """A fresh copy of the demo case mix."""
    return copy.deepcopy(DEMO_CASEMIX)


def scenario() -> dict[str, Any]:
    """A fresh copy of the demo scenario document."""
    return copy.deepcopy(DEMO_SCENARIO)


def inventory() -> dict[str, Any]:
    """A fresh copy of the demo inventory document."""
    return copy.deepcopy(DEMO_INVENTORY)


def audit_log_csv(seed: int = 7) -> str:
    """An invented fresh-gas log: 8 cases in two rooms over two months, a sample every 5 min.

    Half the cases keep a high maintenance flow, half a low one, so the audit has something to find.
    One row is deliberately malformed to show the rejection report.
    """
    import numpy as np

    rng = np.random.default_rng(seed)
    lines = [
        "case_id,time,oxygen_flow [L/min],air_flow [L/min],nitrous_oxide_flow [L/min],agent,"
        "vaporizer_setting [%],end_tidal_agent [%],inspired_oxygen [%],room,patient_weight,patient_age"
    ]
    starts = [
        "2026-01-12T08:05",
        "2026-01-12T10:40",
        "2026-01-19T08:15",
        "2026-01-26T13:00",
        "2026-02-02T08:10",
        "2026-02-09T09:30",
        "2026-02-16T08:00",
        "2026-02-23T11:20",
    ]
    for k, start in enumerate(starts):
        high = k % 2 == 0
        length = int(rng.integers(9, 19)) * 5
        weight, age = int(rng.integers(55, 110)), int(rng.integers(25, 80))
        base = np.datetime64(start)
        for minute in range(0, length + 1, 5):
            wash = minute < 10
            if wash:
                o2, air, dial = 3.0, 3.0, 6.0
            elif high:
                o2, air, dial = 1.0, 1.0, 2.2
            else:
                o2, air, dial = 0.4, 0.2, 3.0
            et = min(1.9, 0.2 + 0.17 * minute) if wash else 1.7 + 0.1 * rng.standard_normal()
            fio2 = 45.0 + 5 * rng.standard_normal()
            t = (base + np.timedelta64(minute, "m")).astype(str)
            lines.append(
                f"HDH-{k + 1:03d},{t},{o2:.1f},{air:.1f},0,sevoflurane,{dial:.1f},{et:.2f},"
                f"{fio2:.1f},theatre {1 + k % 2},{weight},{age}"
            )
    lines.append("HDH-009,2026-02-27T08:00,not-a-number,1,0,sevoflurane,2,1.8,40,theatre 1,70,40")
    return "\n".join(lines) + "\n"
