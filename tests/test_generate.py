"""The synthetic instance generator: deterministic, valid, the requested size, realistic.

The realism properties checked here are the ones issue 3 asks for (short and surplus offices,
a two-period surge, most people with one or two skills, budgets that bind, groups of
interchangeable people of realistic size); each is recomputed from the written files, not
taken from the generator's own bookkeeping.
"""

from __future__ import annotations

import csv
import io
import os
import re
import subprocess
import sys
import tomllib
from collections import Counter
from pathlib import Path

import pandas as pd
import pytest

from rebalance.cli import main
from rebalance.generate import (
    PRESETS,
    GeneratedInstance,
    GeneratorSpec,
    generate,
    spec_for_size,
    write_generated,
)
from rebalance.instance import Instance
from rebalance.planning import make_plan, options_from_instance
from rebalance.readers import read_instance
from rebalance.solve import Status

TINY = GeneratorSpec(staff=40, offices=3, skills=3, periods=4, seed=1)


def _files(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir())}


def _write(spec: GeneratorSpec, folder: Path) -> Instance:
    write_generated(generate(spec), folder)
    return read_instance(folder)


def test_same_seed_same_bytes_different_seed_different_files(tmp_path: Path) -> None:
    args = ["generate", "--staff", "120", "--offices", "5", "--skills", "4", "--periods", "6"]
    assert main([*args, str(tmp_path / "a"), "--seed", "11"]) == 0
    assert main([*args, str(tmp_path / "b"), "--seed", "11"]) == 0
    assert main([*args, str(tmp_path / "c"), "--seed", "12"]) == 0
    a, b, c = (_files(tmp_path / n) for n in "abc")
    assert set(a) == {"settings.toml", "offices.csv", "skills.csv", "staff.csv", "demand.csv",
                      "budget.csv", "move_costs.csv", "vacancies.csv", "attrition.csv"}
    assert a == b
    assert a["staff.csv"] != c["staff.csv"]
    assert a["demand.csv"] != c["demand.csv"]
    # The API and the command line write the same bytes.
    write_generated(generate(GeneratorSpec(staff=120, offices=5, skills=4, periods=6, seed=11)),
                    tmp_path / "d")
    assert _files(tmp_path / "d") == a


def test_same_bytes_whatever_the_hash_seed() -> None:
    # Set and dict order must not leak into the files: two interpreters with different
    # string-hash seeds have to agree byte for byte.
    code = ("import hashlib; from rebalance.generate import GeneratorSpec, generate; "
            "g = generate(GeneratorSpec(staff=200, offices=6, skills=5, periods=5, seed=9)); "
            "print(hashlib.sha256(repr(sorted(g.files.items())).encode()).hexdigest())")
    digests = {
        subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True,
                       env=dict(os.environ, PYTHONHASHSEED=seed)).stdout
        for seed in ("1", "2")
    }
    assert len(digests) == 1


def test_generated_folder_passes_check(tmp_path: Path,
                                       capsys: pytest.CaptureFixture[str]) -> None:
    out = tmp_path / "inst"
    assert main(["generate", str(out), "--size", "small", "--seed", "3"]) == 0
    instance = read_instance(out)
    assert instance.warnings == ()
    assert main(["check", str(out)]) == 0
    assert "valid" in capsys.readouterr().out


@pytest.mark.parametrize("size", list(PRESETS))
def test_presets_give_the_requested_counts(size: str, tmp_path: Path) -> None:
    staff, offices, skills, periods = PRESETS[size]
    instance = _write(spec_for_size(size, seed=5), tmp_path / size)
    assert len(instance.staff) == staff
    assert len(instance.offices) == offices
    assert len(instance.skills) == skills
    assert len(instance.periods) == periods
    # Several offices share a city: fewer locations than offices, and at least two cities.
    locations = Counter(o.location for o in instance.offices)
    assert 2 <= len(locations) < offices
    assert max(locations.values()) >= 2


def test_explicit_counts_override_the_preset(tmp_path: Path) -> None:
    instance = _write(spec_for_size("medium", staff=250, offices=6, skills=5, periods=5),
                      tmp_path / "x")
    assert (len(instance.staff), len(instance.offices), len(instance.skills),
            len(instance.periods)) == (250, 6, 5, 5)


def _staff_frame(folder: Path) -> pd.DataFrame:
    return pd.read_csv(folder / "staff.csv", dtype=str, keep_default_na=False)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_realism_properties_hold_by_construction(seed: int, tmp_path: Path) -> None:
    spec = spec_for_size("small", seed=seed)
    generated = generate(spec)
    write_generated(generated, tmp_path / "s")
    instance = read_instance(tmp_path / "s")

    def demand_fte(office: str, period: int) -> float:
        return sum(d.fte for d in instance.demand if d.office == office and d.period == period)

    def home_fte(office: str) -> float:
        return sum(p.fte for p in instance.staff if p.home_office == office)

    # A short office has more work than its people's FTE; a surplus office clearly less.
    assert generated.short_offices and generated.surplus_offices
    for office in generated.short_offices:
        assert demand_fte(office, 0) > home_fte(office)
    for office in generated.surplus_offices:
        assert demand_fte(office, 0) < 0.9 * home_fte(office)

    # A surge: two consecutive periods well above the period before, then back down.
    names = instance.period_names
    first, second = (names.index(p) for p in generated.surge_periods)
    assert second == first + 1
    for office in generated.surge_offices:
        before, after = demand_fte(office, first - 1), demand_fte(office, second + 1)
        assert demand_fte(office, first) > 1.25 * before
        assert demand_fte(office, second) > 1.25 * after

    # Most people hold one or two skills (issue 3); some hold more than one.
    counts = Counter(len(p.skills) for p in instance.staff)
    assert (counts[1] + counts[2]) / len(instance.staff) >= 0.9
    assert counts[1] / len(instance.staff) >= 0.5
    assert counts[2] > 0

    # Vacancies, attrition, leavers and a hiring cap for every budget year are all present.
    assert sum(instance.vacancies.values()) > 0
    assert instance.attrition
    assert any(p.last_period is not None for p in instance.staff)
    assert {b.year for b in instance.budgets if b.hiring is not None} == set(instance.years)


def test_interchangeable_people_form_realistic_groups(tmp_path: Path) -> None:
    # Issue 3: real job families compress far more than 1.5 people per pool; at agency size
    # groups of about 10-40 people are the aim.  Recounted here from staff.csv with pandas.
    spec = spec_for_size("agency")
    generated = generate(spec)
    write_generated(generated, tmp_path / "agency")
    staff = _staff_frame(tmp_path / "agency")
    keys = ["home_office", "skills", "fte", "can_detail", "can_relocate", "last_period"]
    sizes = staff.groupby(keys).size()
    assert len(sizes) == generated.groups
    assert 10 <= len(staff) / len(sizes) <= 40
    # Most people sit in a group of at least ten.
    assert sizes[sizes >= 10].sum() / len(staff) >= 0.6
    # The knob works: a smaller pool size gives more, smaller groups.
    fine = generate(spec_for_size("agency", pool_size=4))
    assert fine.groups > 1.5 * generated.groups


def test_eligibility_knobs_move_the_shares(tmp_path: Path) -> None:
    none = _write(spec_for_size("small", relocatable_share=0.0, detail_share=1.0),
                  tmp_path / "none")
    assert not any(p.can_relocate for p in none.staff)
    assert all(p.can_detail for p in none.staff)
    every = _write(spec_for_size("small", relocatable_share=1.0, detail_share=0.0),
                   tmp_path / "every")
    assert all(p.can_relocate and not p.can_detail for p in every.staff)


def test_city_names_are_invented_and_seeded() -> None:
    a = generate(GeneratorSpec(seed=1)).cities
    assert a == generate(GeneratorSpec(seed=1)).cities
    assert a != generate(GeneratorSpec(seed=2)).cities
    assert len(set(a)) == len(a)
    assert all(name.isalpha() and name[0].isupper() for name in a)


def test_bad_generator_options_are_all_reported(capsys: pytest.CaptureFixture[str],
                                                tmp_path: Path) -> None:
    code = main(["generate", str(tmp_path / "bad"), "--staff", "3", "--periods", "2",
                 "--surge-factor", "0.5"])
    assert code == 2
    err = capsys.readouterr().err
    assert "--staff" in err and "--periods" in err and "--surge-factor" in err
    assert not (tmp_path / "bad").exists()


def test_generate_refuses_to_replace_a_folder_without_force(tmp_path: Path) -> None:
    out = tmp_path / "keep"
    assert main(["generate", str(out), "--staff", "40", "--offices", "3"]) == 0
    before = _files(out)
    assert main(["generate", str(out), "--staff", "50", "--offices", "3"]) == 2
    assert _files(out) == before
    # A folder generate wrote is replaced with --force.
    assert main(["generate", str(out), "--staff", "50", "--offices", "3", "--force"]) == 0
    with (out / "staff.csv").open() as handle:
        assert sum(1 for _ in csv.DictReader(handle)) == 50


def _tree(folder: Path) -> dict[str, bytes]:
    return {str(p.relative_to(folder)): p.read_bytes() if p.is_file() else b"<folder>"
            for p in sorted(folder.rglob("*"))}


def test_force_replaces_only_an_instance_generate_wrote(tmp_path: Path,
                                                         capsys: pytest.CaptureFixture[str]
                                                         ) -> None:
    # Review finding 7: --force had deleted a folder of notes and a plain file.  plan replaces
    # only folders it wrote (files.output_problem); generate now holds itself to the same.
    from rebalance.files import OutputInUse

    small = ["--staff", "16", "--periods", "3"]
    notes = tmp_path / "notes"
    (notes / "sub").mkdir(parents=True)
    (notes / "notes.txt").write_text("mine")
    (notes / "sub" / "keep.csv").write_text("x\n")
    made = tmp_path / "made"  # a hand-made instance: the same files, its own settings.toml
    assert main(["generate", str(made), *small]) == 0
    (made / "settings.toml").write_text((made / "settings.toml").read_text().replace(
        "# Generated by `rebalance generate`", "# Our own instance, built by hand"))
    extra = tmp_path / "extra"  # a generated instance the user has added a folder to
    assert main(["generate", str(extra), *small]) == 0
    (extra / "demand_report").mkdir()
    (extra / "demand_report" / "qc.csv").write_text("y\n")
    plain = tmp_path / "plain.csv"
    plain.write_text("data\n")
    for out, why in ((notes, "notes.txt, sub"), (made, "no settings.toml written by"),
                     (extra, "demand_report"), (plain, "is a file, not a folder")):
        kept = _tree(out) if out.is_dir() else {"": out.read_bytes()}
        capsys.readouterr()
        assert main(["generate", str(out), "--force", *small]) == 2, out
        err = capsys.readouterr().err
        assert why in err and "nothing was written" in err, err
        assert (_tree(out) if out.is_dir() else {"": out.read_bytes()}) == kept
        with pytest.raises(OutputInUse, match="nothing was written"):
            write_generated(generate(GeneratorSpec(staff=16, periods=3)), out)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["extra", "made", "notes", "plain.csv"]


def test_tiny_generated_instance_solves_to_a_verified_plan(tmp_path: Path) -> None:
    instance = _write(TINY, tmp_path / "tiny")
    options = options_from_instance(instance, time_limit_seconds=30.0, relative_gap=0.0)
    result = make_plan(instance, options)
    assert result.status is Status.OPTIMAL
    assert result.verified, [str(v) for v in result.violations]

    # Budgets bind: lifting them lets the same model cover strictly more of the demand.
    free = instance.with_changes(budgets=())
    unbudgeted = make_plan(free, options_from_instance(free, time_limit_seconds=30.0,
                                                       relative_gap=0.0))
    assert unbudgeted.status is Status.OPTIMAL and unbudgeted.verified
    assert result.plan is not None and unbudgeted.plan is not None
    assert unbudgeted.plan.weighted_shortfall < result.plan.weighted_shortfall - 1.0


def test_generate_output_paths_at_the_edges(tmp_path, capsys, monkeypatch):
    # A sweep of the generator's edges: each of these had been an internal error (exit 1)
    # or had left the replaced file behind, hidden.
    from rebalance.cli import EXIT_USAGE

    small = ["--staff", "16", "--periods", "3"]
    assert main(["generate", str(tmp_path / "s"), "--skills", "91"]) == EXIT_USAGE
    assert "expected a whole number from 1 to 90" in capsys.readouterr().err
    assert main(["generate", str(tmp_path / "s"), "--offices", "201"]) == EXIT_USAGE
    assert "expected a whole number from 2 to 200" in capsys.readouterr().err
    assert main(["generate", str(tmp_path / "s"), "--periods", "101"]) == EXIT_USAGE
    assert "expected a whole number from 3 to 100" in capsys.readouterr().err
    (tmp_path / "realfile").write_text("x\n")
    assert main(["generate", str(tmp_path / "realfile" / "sub"), *small]) == EXIT_USAGE
    assert "its folder cannot be made" in capsys.readouterr().err
    here = tmp_path / "here"
    here.mkdir()
    monkeypatch.chdir(here)
    assert main(["generate", ".", *small]) == 0
    assert (tmp_path / "here" / "settings.toml").is_file()
    afile = tmp_path / "afile.csv"
    afile.write_text("data\n")
    assert main(["generate", str(afile), *small]) == EXIT_USAGE
    assert "is a file" in capsys.readouterr().err
    # Not even with --force (review finding 7): a file is not an instance generate wrote.
    assert main(["generate", str(afile), "--force", *small]) == EXIT_USAGE
    assert afile.read_text() == "data\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["afile.csv", "here", "realfile"]


def test_staff_has_a_stated_upper_bound(tmp_path: Path,
                                        capsys: pytest.CaptureFixture[str]) -> None:
    # Review finding 6: 1e9 staff had run on with no end and 1e7 had ended in an internal
    # MemoryError; now a usage error naming the bound, before anything is generated.
    from rebalance.cli import EXIT_USAGE
    from rebalance.generate import MAX_STAFF

    assert PRESETS["large"][0] < MAX_STAFF
    assert GeneratorSpec(staff=MAX_STAFF, offices=2).problems() == []
    assert GeneratorSpec(staff=MAX_STAFF + 1, offices=2).problems() == [
        f"--staff is {MAX_STAFF + 1}; expected at least 2 per office (>= 4) and at most "
        f"{MAX_STAFF:,} (past that the files outgrow memory)"]
    for staff in ("1000000000", "10000000"):
        assert main(["generate", str(tmp_path / "big"), "--staff", staff, "--offices", "2"]
                    ) == EXIT_USAGE
        assert f"expected at least 2 per office (>= 4) and at most {MAX_STAFF:,}" in (
            capsys.readouterr().err)
    assert not (tmp_path / "big").exists()
    with pytest.raises(ValueError, match="--staff"):
        generate(GeneratorSpec(staff=10**9, offices=2))


# Demand over staff FTE in the first period, per office and role, read back from the files.
def _roles(generated: GeneratedInstance) -> dict[str, list[float]]:
    files = generated.files
    staff = pd.read_csv(io.StringIO(files["staff.csv"]))
    demand = pd.read_csv(io.StringIO(files["demand.csv"]))
    hours_per_fte = tomllib.loads(files["settings.toml"])["horizon"]["hours_per_fte"]
    first = demand[demand.period == demand.period.min()].groupby("office").hours.sum()
    ratio = first / hours_per_fte / staff.groupby("home_office").fte.sum()
    roles: dict[str, list[float]] = {"short": [], "surplus": [], "balanced": []}
    for office, value in ratio.items():
        role = ("short" if office in generated.short_offices else
                "surplus" if office in generated.surplus_offices else "balanced")
        roles[role].append(float(value))
    return roles


@pytest.mark.parametrize("shape", [dict(staff=300, offices=150), dict(staff=20),
                                   dict(staff=100, offices=10), dict(staff=4, offices=2),
                                   dict(staff=400, offices=200, skills=90, periods=3)])
@pytest.mark.parametrize("seed", [0, 1, 2])
def test_office_roles_hold_with_few_staff_per_office(shape: dict[str, int], seed: int) -> None:
    # Review finding 5: at two people per office, 23 of 30 "surplus" offices had more demand
    # than staff, from a flat 0.5-2.0 FTE of work in a skill no one there holds.  The roles
    # as docs/benchmarks.md states them: short offices above what their people cover, surplus
    # ones clearly below (the 0.9 of the realism test above), the rest close to balance.
    roles = _roles(generate(spec_for_size("small", seed=seed, **shape)))
    assert roles["short"] and roles["surplus"]
    assert all(r > 1.0 for r in roles["short"]), roles["short"]
    assert all(r < 0.9 for r in roles["surplus"]), roles["surplus"]
    assert all(0.75 < r < 1.2 for r in roles["balanced"]), roles["balanced"]


def test_seats_are_as_the_benchmarks_page_says() -> None:
    # Review finding 8: the page said 108-125% of headcount; the files held up to 133%, from
    # 2 seats added after rounding up.  The page's own figures, checked against the files.
    text = " ".join((Path(__file__).parent.parent / "docs" / "benchmarks.md").read_text().split())
    found = re.search(r"seats for (\d+)-(\d+)% of headcount at short offices and (\d+)-(\d+)% "
                      r"elsewhere, rounded up, plus (\d+) \((\d+) seats for 2 people\)", text)
    assert found, "the seats sentence of docs/benchmarks.md"
    low_short, high_short, low, high, plus, two = (int(g) for g in found.groups())
    for spec in (spec_for_size("small", seed=0), spec_for_size("small", seed=1),
                 spec_for_size("medium", seed=0), GeneratorSpec(staff=20, offices=10, seed=4)):
        generated = generate(spec)
        heads = Counter(row["home_office"] for row in csv.DictReader(
            io.StringIO(generated.files["staff.csv"])))
        for row in csv.DictReader(io.StringIO(generated.files["offices.csv"])):
            n, seats = heads[row["office"]], int(row["seats"])
            lo, hi = ((low_short, high_short) if row["office"] in generated.short_offices
                      else (low, high))
            assert -(-n * lo // 100) + plus <= seats <= -(-n * hi // 100) + plus, (row, n)
            if n == 2:
                assert seats == two
