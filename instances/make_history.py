"""Write the demo workload history: seven years of monthly case arrivals and two years of
time records for the Fenmarch Regional Review Service (fictional), ending 2026-12.

``rebalance demand instances/demo_history -o instances/demo`` turns it into the demo's
``demand.csv``.  Everything here is invented for the demo.  Levels are calibrated so the FTE
demand lands near the demo's staffing design (Port Ilse Central short, Hollin Cross in
surplus); the two-quarter surge at Fenmarch South and Aldercombe in 2027-Q3/Q4 is a planned
inquiry programme, entered as a forecast adjustment (``adjustments.csv``).

The time records carry planted defects for quality control to find; they are listed in
``planted_defects.csv`` (not an input table).  Seeded: the same files every time.  Run
``python instances/make_history.py [OUT_DIR]``.
"""

from __future__ import annotations

import csv
import sys
from dataclasses import dataclass
from pathlib import Path

import numpy as np

HERE = Path(__file__).parent / "demo_history"
SEED = 20261231
FIRST_ARRIVAL = (2020, 1)
FIRST_RECORD = (2025, 1)
LAST = (2026, 12)
HOURS_PER_FTE_MONTH = 150.0  # 450 productive hours a quarter, as in the demo's settings

# FTE per office and skill the demo's staffing is designed around (2027-2028 level).
TARGET_FTE = {
    "port-ilse-central": {"intake": 11.2, "technical_review": 13.5, "environmental_review": 5.1,
                          "safety_review": 3.3, "legal_review": 5.4, "statistics": 3.2,
                          "inspection": 5.7, "records": 7.6},
    "port-ilse-harbour": {"intake": 2.0, "technical_review": 12.2, "environmental_review": 5.6,
                          "safety_review": 4.0, "legal_review": 4.1, "statistics": 2.0,
                          "inspection": 2.0, "records": 2.0},
    "hollin-cross": {"intake": 5.3, "technical_review": 7.8, "environmental_review": 7.4,
                     "safety_review": 4.4, "legal_review": 3.6, "statistics": 2.2,
                     "inspection": 3.4, "records": 2.7},
    "fenmarch-north": {"intake": 4.0, "technical_review": 4.1, "environmental_review": 5.5,
                       "safety_review": 2.1, "legal_review": 2.0, "statistics": 4.1,
                       "inspection": 12.6, "records": 4.7},
    "fenmarch-south": {"intake": 6.5, "technical_review": 7.5, "environmental_review": 6.2,
                       "safety_review": 3.2, "legal_review": 3.1, "statistics": 1.0,
                       "inspection": 8.2, "records": 2.5},
    "aldercombe": {"intake": 4.7, "technical_review": 13.1, "environmental_review": 5.6,
                   "safety_review": 6.1, "legal_review": 2.9, "statistics": 3.9,
                   "inspection": 2.0, "records": 0.5},
}
SKILLS = list(TARGET_FTE["aldercombe"])
# Case types: monthly arrivals per unit of office size, and hours per case by skill.
CASE_TYPES = {
    "minor_permit": (100.0, {"intake": 1.2, "technical_review": 3.0, "records": 0.4}),
    "major_permit": (20.0, {"intake": 2.5, "technical_review": 12.0,
                            "environmental_review": 5.0, "safety_review": 3.0,
                            "legal_review": 1.5, "statistics": 0.8, "records": 0.6}),
    "environmental_licence": (15.0, {"intake": 1.5, "environmental_review": 9.0,
                                     "legal_review": 1.5, "inspection": 3.0,
                                     "statistics": 0.5}),
    "safety_certificate": (25.0, {"intake": 1.0, "technical_review": 1.0,
                                  "safety_review": 5.0, "inspection": 3.5}),
    "appeal": (4.0, {"legal_review": 10.0, "technical_review": 3.0, "records": 0.8}),
}
# Share of each skill's hours that is case work; the rest is non-case work.
CASE_SHARE = {"intake": 0.85, "technical_review": 0.8, "environmental_review": 0.75,
              "safety_review": 0.7, "legal_review": 0.7, "statistics": 0.35,
              "inspection": 0.45, "records": 0.4}
NONCASE = {"intake": "records_management", "technical_review": "policy_guidance",
           "environmental_review": "policy_guidance", "safety_review": "policy_guidance",
           "legal_review": "policy_guidance", "statistics": "statistical_returns",
           "inspection": "routine_inspection", "records": "records_management"}
TRAINING_SHARE = 0.04
SEASON = {  # monthly arrival pattern, January first
    "permit": [0.9, 0.95, 1.1, 1.15, 1.15, 1.1, 1.0, 0.8, 1.05, 1.05, 0.95, 0.8],
    "licence": [0.8, 0.9, 1.2, 1.3, 1.25, 1.1, 0.95, 0.75, 1.0, 1.0, 0.95, 0.8],
    "flat": [1.0] * 12,
}
PATTERN = {"minor_permit": "permit", "major_permit": "permit",
           "environmental_licence": "licence", "safety_certificate": "permit",
           "appeal": "flat"}
SURGE = [("fenmarch-south", 1.5), ("aldercombe", 1.4)]


@dataclass(frozen=True)
class Planted:
    kind: str
    person: str
    period: str
    activity: str


def month_index(year: int, month: int) -> int:
    return year * 12 + month - 1


def month_name(index: int) -> str:
    return f"{index // 12:04d}-{index % 12 + 1:02d}"


def write(folder: Path, name: str, header: list[str], rows: list[list[object]]) -> None:
    with (folder / name).open("w", newline="") as handle:
        out = csv.writer(handle, lineterminator="\n")
        out.writerow(header)
        out.writerows(rows)


def main(out: Path = HERE) -> list[Planted]:
    rng = np.random.default_rng(SEED)
    out.mkdir(parents=True, exist_ok=True)
    first, start_rec, last = (month_index(*FIRST_ARRIVAL), month_index(*FIRST_RECORD),
                              month_index(*LAST))
    months = np.arange(first, last + 1)
    offices = list(TARGET_FTE)

    # Case arrivals: office size x case mix, a trend per series, seasonality, Poisson noise.
    arrivals: dict[tuple[str, str], np.ndarray] = {}
    per_case: dict[tuple[str, str, str], float] = {}
    noncase_level: dict[tuple[str, str, str], float] = {}
    arrival_rows: list[list[object]] = []
    for office in offices:
        mix = {c: unit * float(rng.uniform(0.6, 1.4)) for c, (unit, _) in CASE_TYPES.items()}
        if office == "aldercombe":
            mix["appeal"] = 0.8  # few appeals here: thin data for the effort standards
        unit_hours = {s: sum(mix[c] * h.get(s, 0.0) for c, (_, h) in CASE_TYPES.items())
                      for s in SKILLS}
        wanted = {s: CASE_SHARE[s] * TARGET_FTE[office][s] * HOURS_PER_FTE_MONTH for s in SKILLS}
        scale = sum(wanted.values()) / sum(unit_hours.values())
        # Office-specific effort: each skill's standard scaled toward this office's workload.
        effort = {s: float(np.clip(wanted[s] / (scale * unit_hours[s]), 0.6, 1.6))
                  if unit_hours[s] > 0 else 0.0 for s in SKILLS}
        for c, (_, hours) in CASE_TYPES.items():
            for s, h in hours.items():
                per_case[(office, c, s)] = h * effort[s] * float(rng.uniform(0.9, 1.1))
        for c in CASE_TYPES:
            # Growth per year: most series grow, a quarter decline.
            growth = float(rng.uniform(-0.06, -0.02) if rng.random() < 0.25
                           else rng.uniform(0.03, 0.09))
            level = scale * mix[c] / (1 + growth)  # the 2027 level is about the target
            years = (months - last) / 12.0
            season = np.array(SEASON[PATTERN[c]])[months % 12]
            mean = level * (1 + growth) ** years * season * rng.normal(1.0, 0.02, len(months))
            counts = rng.poisson(np.maximum(mean, 0.0))
            arrivals[(office, c)] = counts
            arrival_rows += [[month_name(int(m)), office, c, int(n)]
                             for m, n in zip(months, counts, strict=True)]
        for s in SKILLS:
            case_hours = sum(scale * mix[c] * per_case.get((office, c, s), 0.0)
                             for c in CASE_TYPES)
            target = TARGET_FTE[office][s] * HOURS_PER_FTE_MONTH
            noncase_level[(office, s, "training")] = TRAINING_SHARE * target
            rest = max(target - case_hours - TRAINING_SHARE * target, 0.05 * target)
            noncase_level[(office, s, NONCASE[s])] = rest
    arrival_rows.sort(key=lambda r: (r[1], r[2], r[0]))

    # Time records: people per office and skill book the month's work in proportion to FTE.
    record_rows: list[list[object]] = []
    expected_rows: list[list[object]] = []
    n = 0
    record_months = [m for m in months if m >= start_rec]
    for office in offices:
        for s in SKILLS:
            target_fte = TARGET_FTE[office][s]
            ftes: list[float] = []
            while sum(ftes) < target_fte - 0.25:
                ftes.append(1.0 if rng.random() < 0.85 else float(rng.choice([0.5, 0.8])))
            if not ftes:
                ftes = [0.5]
            share = np.array(ftes) / sum(ftes)
            people = []
            for _ in ftes:
                n += 1
                people.append(f"W{n:04d}")
            slope = {a: float(rng.uniform(-0.004, 0.01)) for a in ("training", NONCASE[s])}
            for m in record_months:
                t = m - start_rec
                activities: dict[str, float] = {}
                for c in CASE_TYPES:
                    h = per_case.get((office, c, s), 0.0)
                    if h > 0:
                        cases = arrivals[(office, c)][m - first]
                        activities[c] = cases * h * float(rng.normal(1.0, 0.03))
                for a in ("training", NONCASE[s]):
                    level = noncase_level[(office, s, a)] * (1 + slope[a] * t)
                    activities[a] = level * float(rng.normal(1.0, 0.05))
                for p, w in zip(people, share, strict=True):
                    total = 0.0
                    for a, hours in activities.items():
                        booked = round(hours * w * float(rng.normal(1.0, 0.04)) * 4) / 4
                        if booked >= 0.25:
                            record_rows.append([p, month_name(m), office, s, a, booked])
                            total += booked
                    expected = round(total * float(rng.normal(1.0, 0.02)))
                    expected_rows.append([p, month_name(m), expected])

    planted = _plant_defects(record_rows, rng, last)
    write(out, "case_arrivals.csv", ["month", "office", "case_type", "count"], arrival_rows)
    write(out, "time_records.csv", ["person", "period", "office", "skill", "activity", "hours"],
          record_rows)
    write(out, "expected_hours.csv", ["person", "period", "expected_hours"], expected_rows)
    write(out, "activities.csv", ["activity", "kind", "description"],
          [[c, "case", c.replace("_", " ")] for c in CASE_TYPES]
          + [["policy_guidance", "non_case", "policy and guidance work"],
             ["training", "non_case", "training given and received"],
             ["routine_inspection", "non_case", "programmed inspections not tied to a case"],
             ["statistical_returns", "non_case", "statistical returns and reporting"],
             ["records_management", "non_case", "registry and records work"]])
    write(out, "adjustments.csv", ["office", "case_type", "first_month", "last_month", "factor",
                                   "note"],
          [[o, "", "2027-07", "2027-12", f, "planned inquiry programme (demo story)"]
           for o, f in SURGE])
    write(out, "planted_defects.csv", ["kind", "person", "period", "activity"],
          [[d.kind, d.person, d.period, d.activity] for d in planted])
    (out / "demand.toml").write_text(DEMAND_TOML)
    return planted


def _plant_defects(rows: list[list[object]], rng: np.random.Generator,
                   last: int) -> list[Planted]:
    """Corrupt a few timesheets in 2026 in ways quality control must catch."""
    planted: list[Planted] = []
    used: set[tuple[object, object]] = set()
    late = [i for i, r in enumerate(rows) if str(r[1]) >= "2026-03"]

    def pick(test) -> int:  # type: ignore[no-untyped-def]
        for _ in range(10_000):
            i = late[int(rng.integers(len(late)))]
            r = rows[i]
            if (r[0], r[1]) not in used and test(r):
                used.add((r[0], r[1]))
                return i
        raise RuntimeError("no record fits")

    def sheet(i: int) -> list[int]:
        return [j for j, r in enumerate(rows) if r[0] == rows[i][0] and r[1] == rows[i][1]]

    for _ in range(2):  # decimal slip: 42.5 typed as 425
        i = pick(lambda r: 25 <= float(r[5]) <= 60)
        rows[i][5] = float(rows[i][5]) * 10
        planted.append(Planted("decimal_slip", str(rows[i][0]), str(rows[i][1]), str(rows[i][4])))
    i = pick(lambda r: float(r[5]) >= 4)  # a reversal keyed as a record
    rows[i][5] = -float(rows[i][5])
    planted.append(Planted("negative_hours", str(rows[i][0]), str(rows[i][1]), str(rows[i][4])))
    for code in ("misc", "trainig", "admin-99"):  # codes not in activities.csv
        i = pick(lambda r: True)
        rows[i][4] = code
        planted.append(Planted("unknown_code", str(rows[i][0]), str(rows[i][1]), code))
    for _ in range(2):  # a small line entered twice
        i = pick(lambda r: 2 <= float(r[5]) <= 6)
        rows.append(list(rows[i]))
        planted.append(Planted("duplicate", str(rows[i][0]), str(rows[i][1]), str(rows[i][4])))
    for _ in range(2):  # all case hours booked to the (usually small) appeal code
        i = pick(lambda r: r[3] == "technical_review" and r[4] == "appeal")
        lines = [j for j in sheet(i) if rows[j][4] in CASE_TYPES and j != i]
        rows[i][5] = float(rows[i][5]) + sum(float(rows[j][5]) for j in lines)
        planted.append(Planted("misbooking", str(rows[i][0]), str(rows[i][1]), str(rows[i][4])))
        for j in sorted(lines, reverse=True):
            del rows[j]
        late = [k for k, r in enumerate(rows) if str(r[1]) >= "2026-03"]
    for _ in range(3):  # half a timesheet never submitted
        i = pick(lambda r: True)
        lines = sheet(i)
        drop = lines[: max(1, (len(lines) + 1) // 2)]
        planted.append(Planted("partial_timesheet", str(rows[i][0]), str(rows[i][1]), ""))
        for j in sorted(drop, reverse=True):
            del rows[j]
        late = [k for k, r in enumerate(rows) if str(r[1]) >= "2026-03"]
    for _ in range(2):  # no timesheet at all
        i = pick(lambda r: True)
        planted.append(Planted("missing_timesheet", str(rows[i][0]), str(rows[i][1]), ""))
        for j in sorted(sheet(i), reverse=True):
            del rows[j]
        late = [k for k, r in enumerate(rows) if str(r[1]) >= "2026-03"]
    rows.sort(key=lambda r: (str(r[0]), str(r[1]), str(r[4])))
    return planted


DEMAND_TOML = """\
# Parameters for `rebalance demand` (demo).  Every key is optional; see docs/instance-format.md.
[priority]            # shortfall weight written to demand.csv per skill (default 1)
legal_review = 2      # statutory deadlines in the demo story

[quality]
completeness_tolerance = 0.10
max_record_hours = 200

[standards]
shrinkage_cases = 200
bootstrap_samples = 400
seed = 0

[forecast]
holdout_months = 12
selection_origins = 3
origin_step_months = 6
"""


if __name__ == "__main__":
    main(Path(sys.argv[1]) if len(sys.argv) > 1 else HERE)
