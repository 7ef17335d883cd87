"""Synthetic planning instances: deterministic, fictional, shaped like a multi-office service.

:func:`generate` turns a :class:`GeneratorSpec` into the text of every file of an instance
folder (see ``docs/instance-format.md``); :func:`write_generated` writes them atomically.  The
same spec gives byte-identical files on any machine: all randomness comes from
``random.Random.random()``, the one draw whose sequence Python promises to keep across versions,
and every number is rounded before it is printed.

The organisation is invented: cities get pronounceable names made from syllables, offices sit
several to a city, and people come from a small catalogue of job families (skill mixes), so
that interchangeable people form groups of realistic size rather than one-person pools.  By
construction some offices are short of staff, some have a surplus, a surge lands on a few
offices for two periods, and budgets cover only part of what closing every gap would cost.
"""

from __future__ import annotations

import csv
import io
import math
import random
from collections import defaultdict
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, fields, replace
from pathlib import Path

from rebalance.files import staged_folder
from rebalance.problems import range_words

__all__ = ["PRESETS", "GeneratedInstance", "GeneratorSpec", "generate", "spec_for_size",
           "write_generated"]

# size: (staff, offices, skills, periods), from issue 3.
PRESETS: dict[str, tuple[int, int, int, int]] = {
    "small": (300, 8, 6, 8),
    "medium": (2000, 20, 12, 12),
    "agency": (6000, 40, 20, 12),
    "large": (15000, 60, 30, 12),
}
HOURS_PER_FTE = 450  # common practice: about 1,800 productive hours a year, a quarter of it
SURGE_LENGTH = 2
# Share of a multi-skilled person's time counted towards each skill when sizing demand from
# the workforce: most of it in the first (main) skill.  Invented, like every number here.
MAIN_SKILL_SHARE = 0.7


@dataclass(frozen=True)
class GeneratorSpec:
    """What to generate.  Counts are exact; the shares and factors are realism knobs."""

    staff: int = 300
    offices: int = 8
    skills: int = 6
    periods: int = 8
    seed: int = 0
    multi_skill_share: float = 0.35
    """Share of job groups whose people hold two skills (a few of them three)."""
    pool_size: float = 20.0
    """Target mean number of people per (office, skill mix, fte, eligibility) group."""
    surge_factor: float = 1.4
    """Demand multiplier at surge offices during the two surge periods."""
    budget_tightness: float = 0.5
    """Budgets as a share of the estimated cost of closing every office's gap by hiring."""
    vacancy_share: float = 0.02
    """Funded vacancies as a share of headcount."""
    attrition_scale: float = 1.0
    """Multiplier on the invented annual attrition rates (about 4-11% a year)."""
    leaver_share: float = 0.03
    """Share of people with a known last period inside the horizon."""
    relocatable_share: float = 0.05
    """Share of job groups whose people may be reassigned to another office for good."""
    detail_share: float = 0.8
    """Share of job groups whose people may go on detail."""
    start_year: int = 2027

    def problems(self) -> list[str]:
        """Everything wrong with the spec, as messages naming the option (empty when valid)."""
        out: list[str] = []

        def need(ok: bool, name: str, what: str) -> None:
            if not ok:
                out.append(f"--{name.replace('_', '-')} is {getattr(self, name)}; expected {what}")

        need(2 <= self.offices <= MAX_OFFICES, "offices",
             f"{range_words(2, MAX_OFFICES, integer=True)} (a short and a surplus office; past "
             f"{MAX_OFFICES} the model of relocatable people outgrows memory)")
        need(self.staff >= 2 * max(self.offices, 1), "staff",
             f"at least 2 per office (>= {2 * max(self.offices, 1)})")
        need(1 <= self.skills <= MAX_SKILLS, "skills",
             f"{range_words(1, MAX_SKILLS, integer=True)} (as many as there are invented "
             "skill names)")
        need(SURGE_LENGTH + 1 <= self.periods <= MAX_PERIODS, "periods",
             f"{range_words(SURGE_LENGTH + 1, MAX_PERIODS, integer=True)} (a surge of "
             f"{SURGE_LENGTH} and a lead-in; at most {MAX_PERIODS // 4} years of quarters, "
             "as demand grows year on year)")
        need(self.seed >= 0, "seed", "a whole number >= 0")
        for name, (low, high) in KNOB_RANGES.items():
            value = getattr(self, name)
            need(low <= value and (high is None or value <= high), name,
                 range_words(low, high))
        need(1900 <= self.start_year <= 9000, "start_year", "a year from 1900 to 9000")
        return out


# The realism knobs' allowed ranges (low, high; None: no upper end), for the checks above
# and the command's help.
KNOB_RANGES: dict[str, tuple[float, float | None]] = {
    "multi_skill_share": (0.0, 1.0), "pool_size": (1.0, None), "surge_factor": (1.0, 5.0),
    "budget_tightness": (0.0, 10.0), "vacancy_share": (0.0, 0.5), "attrition_scale": (0.0, 4.0),
    "leaver_share": (0.0, 0.5), "relocatable_share": (0.0, 1.0), "detail_share": (0.0, 1.0),
}


def spec_for_size(size: str, **overrides: object) -> GeneratorSpec:
    """The preset ``size`` (small, medium, agency, large) with some fields replaced."""
    if size not in PRESETS:
        raise ValueError(f"unknown size '{size}'; expected one of {', '.join(PRESETS)}")
    staff, offices, skills, periods = PRESETS[size]
    spec = GeneratorSpec(staff=staff, offices=offices, skills=skills, periods=periods)
    known = {f.name for f in fields(GeneratorSpec)}
    given = {k: v for k, v in overrides.items() if v is not None}
    unknown = sorted(set(given) - known)
    if unknown:
        raise ValueError(f"unknown generator setting(s): {', '.join(unknown)}")
    return replace(spec, **given)  # type: ignore[arg-type]


@dataclass(frozen=True)
class GeneratedInstance:
    """The files of one generated instance (name -> text) and what was built into it."""

    spec: GeneratorSpec
    files: Mapping[str, str]
    cities: tuple[str, ...]
    short_offices: tuple[str, ...]
    surplus_offices: tuple[str, ...]
    surge_offices: tuple[str, ...]
    surge_periods: tuple[str, ...]
    groups: int = 0
    """Distinct (home office, skill mix, fte, eligibility, last period) groups of people."""
    notes: tuple[str, ...] = field(default=())


class _Draw:
    """Random draws built only on ``random()``, whose sequence Python keeps stable."""

    def __init__(self, seed: int) -> None:
        self._rng = random.Random(seed)

    def unit(self) -> float:
        return self._rng.random()

    def uniform(self, low: float, high: float) -> float:
        return low + (high - low) * self._rng.random()

    def below(self, n: int) -> int:
        return min(n - 1, int(self._rng.random() * n))

    def chance(self, p: float) -> bool:
        return self._rng.random() < p

    def pick(self, items: Sequence[str]) -> str:
        return items[self.below(len(items))]

    def weighted(self, weights: Sequence[float]) -> int:
        total = sum(weights)
        target = self._rng.random() * total
        running = 0.0
        for i, w in enumerate(weights):
            running += w
            if target < running:
                return i
        return len(weights) - 1

    def shuffled(self, items: Sequence[int]) -> list[int]:
        out = list(items)
        for i in range(len(out) - 1, 0, -1):  # Fisher-Yates
            j = self.below(i + 1)
            out[i], out[j] = out[j], out[i]
        return out


def _apportion(total: int, weights: Sequence[float], minimum: int = 1) -> list[int]:
    """Split ``total`` in proportion to ``weights``, each part >= ``minimum``.

    Largest-remainder rounding: deterministic, and the parts add up to ``total`` exactly.
    """
    n = len(weights)
    spare = total - minimum * n
    scale = spare / sum(weights)
    raw = [w * scale for w in weights]
    parts = [math.floor(r) for r in raw]
    order = sorted(range(n), key=lambda i: (-(raw[i] - parts[i]), i))
    for i in order[: spare - sum(parts)]:
        parts[i] += 1
    return [minimum + p for p in parts]


# --------------------------------------------------------------------------------------------
# names

_ONSETS = ("b", "br", "d", "dr", "f", "g", "h", "k", "kr", "l", "m", "n", "p", "qu", "r", "s",
           "sk", "t", "th", "v", "vr", "z", "")
_VOWELS = ("a", "e", "i", "o", "u", "ae", "ei", "ou", "y")
_CODAS = ("", "", "n", "r", "l", "s", "th", "m", "sk", "nd")
_ENDINGS = ("avel", "orin", "esse", "undra", "emor", "ithe", "anor", "ovia", "elis", "ardt",
            "umbe", "ossa")
_SUFFIXES = ("central", "north", "south", "east", "west", "harbour", "riverside", "hill",
             "park", "gate", "market", "bridge")
_SUBJECTS = ("claims", "appeals", "permits", "licensing", "benefits", "grants", "tariffs",
             "pensions", "records", "inspection", "audit", "complaints", "registrations",
             "disputes", "customs", "housing", "planning", "safety")
_ACTIVITIES = ("intake", "review", "adjudication", "quality_check", "casework")
MAX_SKILLS = len(_SUBJECTS) * len(_ACTIVITIES)  # every skill name is subject_activity
# Relocatable people's cost adjustments take a row per location and a term per destination
# for each person and period: offices squared per person.  Measured (3 skills, 3 periods,
# two staff per office): 200 offices 1.8M nonzeros, built in 1.2 s; 1,000 offices had held
# 14 GB before a 15 s plan was stopped at 90 s.
MAX_OFFICES = 200
# 40,000 quarters had written 56 MB with demand grown 401-fold; plans look a few years ahead.
MAX_PERIODS = 100


def _city_names(draw: _Draw, count: int) -> list[str]:
    names: list[str] = []
    while len(names) < count:
        syllables = 1 + draw.below(2)
        word = draw.pick(_ONSETS)
        for i in range(syllables):
            if i:
                word += draw.pick(_ONSETS[:-1])  # no vowel clash inside the name
            word += draw.pick(_VOWELS)
            # The ending starts with a vowel, so the last syllable closes on a consonant.
            word += draw.pick(_CODAS[2:] if i == syllables - 1 else _CODAS)
        word = (word + draw.pick(_ENDINGS)).capitalize()
        if 6 <= len(word) <= 12 and word not in names:
            names.append(word)
    return names


def _skill_names(draw: _Draw, count: int) -> list[str]:
    combos = [f"{s}_{a}" for s in _SUBJECTS for a in _ACTIVITIES]
    order = draw.shuffled(range(len(combos)))
    if count > len(combos):
        raise ValueError(f"at most {len(combos)} skills can be generated")
    return [combos[i] for i in order[:count]]


# --------------------------------------------------------------------------------------------
# the organisation


@dataclass(frozen=True)
class _Template:
    """A group of interchangeable people: one job family with one fte and eligibility."""

    skills: tuple[tuple[int, float], ...]
    fte: float
    can_detail: bool
    can_relocate: bool


def _families(draw: _Draw, spec: GeneratorSpec, popularity: list[float]) -> tuple[
        list[tuple[tuple[int, float], ...]], list[tuple[tuple[int, float], ...]]]:
    """The job-family catalogue: single-skill families and multi-skill mixes."""
    k = spec.skills
    single: list[tuple[tuple[int, float], ...]] = [((i, 1.0),) for i in range(k)]
    multi: list[tuple[tuple[int, float], ...]] = []
    if k >= 2:
        for _ in range(max(1, round(1.5 * k))):
            main = draw.weighted(popularity)
            mix = [(main, 1.0)]
            extra = 2 if (k >= 3 and draw.chance(0.1)) else 1
            while len(mix) < 1 + extra:
                other = draw.weighted(popularity)
                if all(other != s for s, _ in mix):
                    mix.append((other, (5 + draw.below(4)) / 10))  # 0.5 .. 0.8
            family = tuple(mix)
            if family not in multi:
                multi.append(family)
    return single, multi


def _templates(draw: _Draw, spec: GeneratorSpec, headcount: int, popularity: list[float],
               single: list[tuple[tuple[int, float], ...]],
               multi: list[tuple[tuple[int, float], ...]]) -> list[tuple[_Template, float]]:
    # Enough groups for a spread of skills per office, else as many as the pool size asks.
    wanted = max(math.ceil(spec.skills / 3), round(headcount / spec.pool_size))
    wanted = max(1, min(wanted, headcount))
    chosen: dict[_Template, float] = {}
    for _ in range(wanted):
        if multi and draw.chance(spec.multi_skill_share):
            family = multi[draw.below(len(multi))]
        else:
            family = single[draw.weighted(popularity)]
        part_time = draw.chance(0.18)
        fte = (0.8, 0.6, 0.5)[draw.below(3)] if part_time else 1.0
        template = _Template(family, fte, draw.chance(spec.detail_share),
                             draw.chance(spec.relocatable_share))
        weight = draw.uniform(0.6, 1.4) * (0.5 if part_time else 1.0)
        if len(family) > 2:
            weight *= 0.5  # people with three skills are rarer still
        chosen[template] = chosen.get(template, 0.0) + weight
    return list(chosen.items())


def _csv(header: Sequence[str], rows: Sequence[Sequence[object]]) -> str:
    buffer = io.StringIO()
    out = csv.writer(buffer, lineterminator="\n")
    out.writerow(header)
    out.writerows(rows)
    return buffer.getvalue()


def _money(value: float, step: int = 100) -> int:
    return int(round(value / step) * step)


def generate(spec: GeneratorSpec) -> GeneratedInstance:
    """Every file of an instance folder for ``spec``, as text; raise ValueError if invalid."""
    bad = spec.problems()
    if bad:
        raise ValueError("; ".join(bad))
    draw = _Draw(spec.seed)
    T = spec.periods
    periods = [f"{spec.start_year + (q // 4)}-Q{q % 4 + 1}" for q in range(T)]
    year_of = [p.split("-")[0] for p in periods]
    years = list(dict.fromkeys(year_of))

    # ---- cities and offices ---------------------------------------------------------------
    n_cities = max(2, round(spec.offices / 3))
    cities = _city_names(draw, n_cities)
    where = [(draw.uniform(0, 800), draw.uniform(0, 800)) for _ in cities]  # km
    city_size = [draw.uniform(0.5, 1.5) for _ in cities]
    office_city = list(range(n_cities))[: spec.offices]
    while len(office_city) < spec.offices:
        office_city.append(draw.weighted(city_size))
    used_suffix: dict[int, int] = defaultdict(int)
    office_names = []
    for c in office_city:
        slug = cities[c].lower()
        n = used_suffix[c]
        used_suffix[c] += 1
        suffix = _SUFFIXES[n] if n < len(_SUFFIXES) else f"office-{n + 1}"
        office_names.append(f"{slug}-{suffix}")
    headcount = _apportion(spec.staff, [draw.uniform(0.5, 1.5) for _ in office_names], 2)

    roles = draw.shuffled(range(spec.offices))
    n_short = max(1, round(0.2 * spec.offices))
    n_surplus = max(1, round(0.2 * spec.offices))
    short = sorted(roles[:n_short])
    surplus = sorted(roles[n_short:n_short + n_surplus])
    normal = roles[n_short + n_surplus:]
    # With two offices there is none besides the short and the surplus one: the surge lands
    # on the short one, the harder case (on the surplus one its people would absorb it).
    surge = sorted(normal[: max(1, round(spec.offices / 6))]) if normal else short[:1]
    factor = []
    for o in range(spec.offices):
        if o in short:
            factor.append(draw.uniform(1.25, 1.35))
        elif o in surplus:
            factor.append(draw.uniform(0.70, 0.80))
        else:
            factor.append(draw.uniform(0.95, 1.05))
    surge_start = max(1, min(T - SURGE_LENGTH, T // 3))
    surge_periods = list(range(surge_start, surge_start + SURGE_LENGTH))

    # ---- skills ------------------------------------------------------------------------------
    skill_names = _skill_names(draw, spec.skills)
    popularity = [1.0 / (1 + r) ** 0.6 for r in draw.shuffled(range(spec.skills))]
    skill_rows = []
    salary, onboarding, time_to_hire = [], [], []
    for name in skill_names:
        pay = _money(draw.uniform(15000, 32000), 500)
        tth = min(T - 1, 1 + draw.weighted([0.45, 0.4, 0.15]))
        ramp = {1: "0.6", 2: "0.4 0.7", 3: "0.4 0.6 0.8"}[min(tth, 3)]
        salary.append(pay)
        onboarding.append(_money(pay * draw.uniform(0.3, 0.5), 500))
        time_to_hire.append(tth)
        skill_rows.append([name, pay, onboarding[-1], tth, ramp])
    priority = [2 if draw.chance(1 / 6) else 1 for _ in skill_names]
    attrition = [round(min(0.5, draw.uniform(0.04, 0.11) * spec.attrition_scale), 3)
                 for _ in skill_names]

    # ---- people ------------------------------------------------------------------------------
    single, multi = _families(draw, spec, popularity)
    staff_rows: list[list[object]] = []
    capacity: dict[tuple[int, int], float] = defaultdict(float)  # (office, skill) -> FTE
    groups: set[tuple[object, ...]] = set()
    person = 0
    for o, office in enumerate(office_names):
        templates = _templates(draw, spec, headcount[o], popularity, single, multi)
        # At most one template per person (see _templates), so every group gets someone.
        sizes = _apportion(headcount[o], [w for _, w in templates], 1)
        for (template, _), size in zip(templates, sizes, strict=True):
            skills_text = " ".join(f"{skill_names[k]}:{p:g}" for k, p in template.skills)
            for _ in range(size):
                person += 1
                last = ""
                if T >= 3 and draw.chance(spec.leaver_share):
                    last = periods[1 + draw.below(T - 2)]
                staff_rows.append([f"S{person:05d}", office, f"{template.fte:g}", skills_text,
                                   str(template.can_detail).lower(),
                                   str(template.can_relocate).lower(), last])
                groups.add((o, template, last))
                main_share = MAIN_SKILL_SHARE if len(template.skills) > 1 else 1.0
                for i, (k, p) in enumerate(template.skills):
                    share = main_share if i == 0 else (1 - main_share) / (len(template.skills) - 1)
                    capacity[(o, k)] += template.fte * p * share

    # ---- demand ------------------------------------------------------------------------------
    held = sorted({k for (_, k) in capacity})
    demand_fte: dict[tuple[int, int, int], float] = {}
    for o in range(spec.offices):
        base = {k: capacity[(o, k)] for k in held if capacity.get((o, k), 0.0) > 0}
        # One skill the office lacks: work only a detail or a hire can cover.
        missing = [k for k in held if k not in base]
        if missing:
            base[missing[draw.below(len(missing))]] = draw.uniform(0.5, 2.0)
        for k in sorted(base):
            for t in range(T):
                level = base[k] * factor[o] * (1.0 + 0.01 * t) * draw.uniform(0.96, 1.04)
                if o in surge and t in surge_periods:
                    level *= spec.surge_factor
                demand_fte[(o, k, t)] = level
    demand_rows = []
    for (o, k, t), fte in sorted(demand_fte.items()):
        hours = round(fte * HOURS_PER_FTE)
        if hours > 0:
            demand_rows.append([office_names[o], skill_names[k], periods[t], hours, priority[k]])

    # ---- vacancies, seats, hiring throughput ---------------------------------------------------
    vacancies: dict[tuple[int, int], int] = defaultdict(int)
    office_weight = [3.0 if o in short else 2.0 if o in surge else 0.0 if o in surplus else 1.0
                     for o in range(spec.offices)]
    for _ in range(round(spec.vacancy_share * spec.staff)):
        o = draw.weighted(office_weight)
        ks = [k for k in held if capacity.get((o, k), 0.0) > 0]
        k = ks[draw.weighted([capacity[(o, k)] for k in ks])]
        vacancies[(o, k)] += 1
    office_rows = []
    for o, office in enumerate(office_names):
        # Room and hiring throughput are generous on purpose: money, not desks, should be
        # what stops an office from closing its gap (short offices are the most crowded).
        room = draw.uniform(1.08, 1.15) if o in short else draw.uniform(1.10, 1.25)
        seats = math.ceil(headcount[o] * room) + 2
        max_hires = max(2, round(0.08 * headcount[o]))
        office_rows.append([office, cities[office_city[o]], seats, max_hires])

    # ---- move costs by city pair (distance-driven) -------------------------------------------
    move_rows = []
    detail_costs = []
    for a, (xa, ya) in enumerate(where):
        for b, (xb, yb) in enumerate(where):
            if a != b:
                km = math.hypot(xa - xb, ya - yb)
                detail_costs.append(_money(6000 + 12 * km))
                move_rows.append([cities[a], cities[b], detail_costs[-1],
                                  _money(20000 + 40 * km, 500)])
    mean_detail = sum(detail_costs) / len(detail_costs)

    # ---- attrition --------------------------------------------------------------------------
    attrition_rows: list[list[object]] = [[name, "", attrition[k]]
                                          for k, name in enumerate(skill_names)]
    office_rate: dict[tuple[int, int], float] = {}
    for o in short:  # short offices also lose people faster in their biggest skill
        ks = [k for k in held if capacity.get((o, k), 0.0) > 0]
        k = max(ks, key=lambda k: (capacity[(o, k)], -k))
        office_rate[(o, k)] = round(min(0.6, attrition[k] * 1.4), 3)
        attrition_rows.append([skill_names[k], office_names[o], office_rate[(o, k)]])

    # ---- budgets: a share of what closing every office's own gap by hiring would cost --------
    hiring_need: dict[str, float] = defaultdict(float)
    moves_need: dict[str, float] = defaultdict(float)
    peak_gap: dict[tuple[int, int], float] = defaultdict(float)
    for (o, k, t), fte in demand_fte.items():
        rate = office_rate.get((o, k), attrition[k])
        supply = capacity.get((o, k), 0.0) * (1 - rate) ** (t / 4)
        gap = max(0.0, fte - supply)
        # Details could close about half of a gap (the rest is beyond the away-share limit
        # and the surplus there is); hires can close a gap from their time to hire on.
        moves_need[year_of[t]] += 0.5 * gap * mean_detail
        if t >= time_to_hire[k]:
            hiring_need[year_of[t]] += gap * salary[k]
            peak_gap[(o, k)] = max(peak_gap[(o, k)], gap)
    for (_, k), gap in peak_gap.items():
        hiring_need[year_of[min(time_to_hire[k], T - 1)]] += math.ceil(gap) * onboarding[k]
    budget_rows = [[y, _money(spec.budget_tightness * hiring_need[y], 1000),
                    _money(spec.budget_tightness * max(moves_need[y], mean_detail), 1000)]
                   for y in years]

    names = {o: office_names[o] for o in range(spec.offices)}
    story = [
        f"# Generated by `rebalance generate` (seed {spec.seed}): a fictional review service.",
        f"# {spec.staff} staff in {spec.offices} offices in {n_cities} invented cities, "
        f"{spec.skills} skills, {T} quarters; {len(groups)} groups of interchangeable people.",
        "# Short of staff: " + ", ".join(names[o] for o in short),
        "# Surplus: " + ", ".join(names[o] for o in surplus),
        *(["# Surge x" + f"{spec.surge_factor:g} in " + ", ".join(names[o] for o in surge)
           + f" in {periods[surge_periods[0]]} and {periods[surge_periods[-1]]}"]
          if spec.surge_factor != 1 else ["# No surge (factor 1)"]),
        "# Generator settings: " + ", ".join(f"{f.name}={getattr(spec, f.name)}"
                                             for f in fields(GeneratorSpec)),
        "# Every name and number here is invented.",
    ]
    settings = "\n".join(story) + f"""
[horizon]
start = "{spec.start_year}-Q1"
count = {T}
hours_per_fte = {HOURS_PER_FTE}

[policy]
max_away_share = 0.15
max_consecutive_detail_periods = 2

[move_costs]
detail_cost_per_period = {_money(mean_detail)}
relocation_cost = {_money(20000 + 40 * 400, 500)}
same_location_detail_cost_per_period = 1500
same_location_relocation_cost = 5000

[objective]
mode = "shortfall-first"

[solver]
name = "highs"
time_limit_seconds = 60
relative_gap = 0.01
threads = 2  # a large model's bound is worked out beside the search
seed = 0
"""
    files = {
        "settings.toml": settings,
        "offices.csv": _csv(("office", "location", "seats", "max_hires_per_period"),
                            office_rows),
        "skills.csv": _csv(("skill", "salary_per_period", "onboarding_cost", "time_to_hire",
                            "ramp"), skill_rows),
        "staff.csv": _csv(("person", "home_office", "fte", "skills", "can_detail",
                           "can_relocate", "last_period"), staff_rows),
        "demand.csv": _csv(("office", "skill", "period", "hours", "priority"), demand_rows),
        "budget.csv": _csv(("year", "hiring", "moves"), budget_rows),
        "move_costs.csv": _csv(("from_location", "to_location", "detail_cost_per_period",
                                "relocation_cost"), move_rows),
        "vacancies.csv": _csv(("office", "skill", "count"),
                              [[office_names[o], skill_names[k], n]
                               for (o, k), n in sorted(vacancies.items())]),
        "attrition.csv": _csv(("skill", "office", "annual_rate"), attrition_rows),
    }
    return GeneratedInstance(
        spec=spec,
        files=files,
        cities=tuple(cities),
        short_offices=tuple(names[o] for o in short),
        surplus_offices=tuple(names[o] for o in surplus),
        surge_offices=tuple(names[o] for o in surge),
        surge_periods=tuple(periods[t] for t in surge_periods),
        groups=len(groups),
    )


def write_generated(generated: GeneratedInstance, out_dir: str | Path) -> Path:
    """Write the files into ``out_dir`` all at once (a folder swap: all of it or nothing)."""
    with staged_folder(out_dir) as folder:
        for name, text in sorted(generated.files.items()):
            with (folder / name).open("w", encoding="utf-8", newline="") as handle:
                handle.write(text)
    return Path(out_dir)
