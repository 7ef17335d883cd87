"""Write the demo instance: a fictional review service in four invented cities.

The Fenmarch Regional Review Service (fictional) reviews permit applications in six offices.
Port Ilse Central is short of staff, Hollin Cross has a surplus, and a two-quarter surge lands
on Fenmarch South and Aldercombe in 2027-Q3 and 2027-Q4.  Every number here is invented for
the demo.  Run ``python instances/make_demo.py`` to rewrite ``instances/demo/`` except its
demand, which ``make demand-demo`` builds from the workload history (seeded: the same files
every time).
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
from make_history import TARGET_FTE

HERE = Path(__file__).parent / "demo"
SEED = 20270101

OFFICES = [
    # office, location, seats, max hires per period, workload / staff capacity
    ("port-ilse-central", "Port Ilse", 52, 4, 1.22),   # short of staff
    ("port-ilse-harbour", "Port Ilse", 40, 2, 0.97),
    ("hollin-cross", "Hollin Cross", 60, 2, 0.72),     # surplus
    ("fenmarch-north", "Fenmarch", 44, 3, 0.98),
    ("fenmarch-south", "Fenmarch", 42, 3, 1.00),       # surge in 2027-Q3/Q4 (in the history)
    ("aldercombe", "Aldercombe", 46, 3, 0.95),         # surge in 2027-Q3/Q4 (in the history)
]

SKILLS = [
    # skill, salary per quarter, onboarding cost, time to hire (quarters), ramp
    ("intake", 16000, 6000, 1, "0.6"),
    ("technical_review", 26000, 12000, 2, "0.4 0.7"),
    ("environmental_review", 25000, 12000, 2, "0.4 0.7"),
    ("safety_review", 25000, 11000, 2, "0.5 0.8"),
    ("legal_review", 29000, 14000, 3, "0.5 0.8"),
    ("statistics", 27000, 12000, 2, "0.5 0.8"),
    ("inspection", 21000, 9000, 1, "0.5"),
    ("records", 14000, 4000, 1, "0.7"),
]
CITY_COSTS = {
    # (from, to): detail cost per quarter, relocation cost
    ("Port Ilse", "Hollin Cross"): (14000, 42000),
    ("Port Ilse", "Fenmarch"): (11000, 36000),
    ("Port Ilse", "Aldercombe"): (16000, 48000),
    ("Hollin Cross", "Fenmarch"): (9000, 30000),
    ("Hollin Cross", "Aldercombe"): (12000, 38000),
    ("Fenmarch", "Aldercombe"): (10000, 33000),
}
PERIODS = [f"{y}-Q{q}" for y in (2027, 2028) for q in (1, 2, 3, 4)]
SECOND_SKILL = {
    "intake": ("records", 0.8),
    "technical_review": ("environmental_review", 0.6),
    "environmental_review": ("technical_review", 0.6),
    "safety_review": ("inspection", 0.7),
    "statistics": ("technical_review", 0.5),
    "inspection": ("safety_review", 0.6),
    "records": ("intake", 0.7),
}


def write(name: str, header: list[str], rows: list[list[object]]) -> None:
    with (HERE / name).open("w", newline="") as handle:
        out = csv.writer(handle, lineterminator="\n")
        out.writerow(header)
        out.writerows(rows)


def main() -> None:
    rng = np.random.default_rng(SEED)
    HERE.mkdir(parents=True, exist_ok=True)
    skill_names = [s[0] for s in SKILLS]

    write("offices.csv", ["office", "location", "seats", "max_hires_per_period"],
          [[o, loc, seats, hires] for o, loc, seats, hires, _ in OFFICES])
    write("skills.csv", ["skill", "salary_per_period", "onboarding_cost", "time_to_hire", "ramp"],
          [[s, sal, onb, tth, ramp] for s, sal, onb, tth, ramp in SKILLS])

    # Staff in job families: most people hold one skill; a quarter also hold their family's
    # usual second skill at a fixed proficiency.  Headcount per office and skill follows the
    # workload the demo history is built around (make_history.TARGET_FTE), divided by the
    # office's staffing factor, so Port Ilse Central is short and Hollin Cross has a surplus.
    staff_rows: list[list[object]] = []
    n = 0
    for office, _, _, _, factor in OFFICES:
        for skill in skill_names:
            heads = max(1, round(TARGET_FTE[office][skill] / factor / 0.96))
            for _ in range(heads):
                n += 1
                skills = [(skill, 1.0)]
                second = SECOND_SKILL.get(skill)
                if second is not None and rng.random() < 0.2:
                    skills.append(second)
                fte = 0.5 if rng.random() < 0.05 else 1.0
                can_detail = rng.random() < 0.6
                can_relocate = rng.random() < 0.02
                last = ""
                if rng.random() < 0.03:
                    last = PERIODS[int(rng.integers(2, len(PERIODS) - 1))]
                staff_rows.append([f"E{n:04d}", office, fte,
                                   " ".join(f"{s}:{p:g}" for s, p in skills),
                                   str(can_detail).lower(), str(can_relocate).lower(), last])
    write("staff.csv", ["person", "home_office", "fte", "skills", "can_detail", "can_relocate",
                        "last_period"], staff_rows)
    # demand.csv comes from the workload history: `make demand-demo` (instances/make_history.py).

    move_rows = []
    for (a, b), (detail, relocation) in CITY_COSTS.items():
        move_rows.append([a, b, detail, relocation])
        move_rows.append([b, a, detail, relocation])
    write("move_costs.csv", ["from_location", "to_location", "detail_cost_per_period",
                             "relocation_cost"], move_rows)
    write("vacancies.csv", ["office", "skill", "count"], [
        ["port-ilse-central", "technical_review", 3],
        ["port-ilse-central", "intake", 2],
        ["fenmarch-south", "environmental_review", 2],
        ["aldercombe", "safety_review", 1],
        ["fenmarch-north", "legal_review", 1],
    ])
    write("attrition.csv", ["skill", "office", "annual_rate"], [
        ["intake", "", 0.12],
        ["technical_review", "", 0.07],
        ["technical_review", "port-ilse-central", 0.10],
        ["environmental_review", "", 0.06],
        ["safety_review", "", 0.06],
        ["legal_review", "", 0.05],
        ["statistics", "", 0.08],
        ["inspection", "", 0.09],
        ["records", "", 0.10],
    ])
    write("budget.csv", ["year", "hiring", "moves"], [[2027, 520000, 300000],
                                                      [2028, 1400000, 260000]])
    (HERE / "settings.toml").write_text(SETTINGS)


SETTINGS = """\
# Fenmarch Regional Review Service (fictional): eight quarters of permit review work.
[horizon]
start = "2027-Q1"
count = 8
hours_per_fte = 450   # productive hours per FTE per quarter (common practice: ~1,800 a year)

[policy]
max_away_share = 0.15
max_consecutive_detail_periods = 2

[move_costs]
detail_cost_per_period = 12000
relocation_cost = 40000
same_location_detail_cost_per_period = 1500
same_location_relocation_cost = 5000

[objective]
mode = "shortfall-first"

[solver]
name = "highs"
time_limit_seconds = 55
relative_gap = 0.01

[report]
title = "Fenmarch Regional Review Service, permit review 2027-2028"   # fictional
"""

if __name__ == "__main__":
    main()
