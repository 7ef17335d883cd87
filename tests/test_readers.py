"""Reading instances: every bad input gets file:row: column and what was expected, all at once,
with a non-zero exit and nothing written; conversions and warnings."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest
from conftest import DATA

from rebalance import InstanceError, read_instance
from rebalance.cli import EXIT_INFEASIBLE, EXIT_INVALID_INPUT, main
from rebalance.numbers import plain_number

BAD = DATA / "bad"


def overlay(case: Path, target: Path) -> Path:
    """The tiny instance with the case's files laid over it (and REMOVE'd files deleted)."""
    shutil.copytree(DATA / "tiny", target)
    for file in case.iterdir():
        if file.name in ("expect.txt", "REMOVE"):
            continue
        shutil.copy(file, target / file.name)
    if (case / "REMOVE").exists():
        for name in (case / "REMOVE").read_text().split():
            (target / name).unlink()
    return target


def valid_copy(tmp_path: Path) -> Path:
    """A valid instance folder to spoil, ``tmp_path / "i"`` (tiny's, from the bad cases' base)."""
    target = overlay(BAD / "empty_demand", tmp_path / "i")
    shutil.copy(DATA / "tiny" / "demand.csv", target / "demand.csv")
    return target


@pytest.mark.parametrize("case", sorted(p.name for p in BAD.iterdir()))
def test_bad_input_is_reported_in_full_and_nothing_is_written(case, tmp_path, capsys):
    instance = overlay(BAD / case, tmp_path / "instance")
    out = tmp_path / "out"
    code = main(["plan", str(instance), "-o", str(out), "-q"])
    err = capsys.readouterr().err
    assert code == EXIT_INVALID_INPUT
    assert "Traceback" not in err
    for expected in (BAD / case / "expect.txt").read_text().splitlines():
        assert expected in err, f"missing message: {expected}\n--- got:\n{err}"
    assert not out.exists()
    assert not list(tmp_path.glob(".out*"))  # no half-written staging folder either


def test_a_missing_folder_or_unreadable_settings_is_said_once(tmp_path):
    # Each had also drawn "settings.toml: horizon: give either periods = ..." (a sweep).
    for path, expected in ((tmp_path / "nope", "instance folder not found"),
                           (DATA / "tiny" / "staff.csv", "is a file; expected an instance")):
        with pytest.raises(InstanceError) as caught:
            read_instance(path)
        assert [p.message for p in caught.value.problems] == [
            next(p.message for p in caught.value.problems if expected in p.message)]
    (tmp_path / "empty").mkdir()
    with pytest.raises(InstanceError) as caught:
        read_instance(tmp_path / "empty")
    assert all(p.message == "file is missing" for p in caught.value.problems)


def test_all_problems_come_at_once():
    with pytest.raises(InstanceError) as caught:
        read_instance_with_many_problems()
    files = {p.file for p in caught.value.problems}
    assert {"staff.csv", "skills.csv"} <= files


def read_instance_with_many_problems():
    import tempfile

    with tempfile.TemporaryDirectory() as tmp:
        target = overlay(BAD / "fte_and_proficiency", Path(tmp) / "i")
        shutil.copy(BAD / "bad_numbers" / "skills.csv", target / "skills.csv")
        return read_instance(target)


def test_hours_convert_with_hours_per_fte(tmp_path):
    # 2,087 hours is the work year used as the hourly-rate divisor for full-time staff in
    # 5 U.S.C. 5504(b) (from memory); a quarter is a fourth of it: 521.75 hours per FTE.
    target = overlay(BAD / "empty_demand", tmp_path / "i")
    settings = (target / "settings.toml").read_text().replace("hours_per_fte = 480",
                                                             "hours_per_fte = 521.75")
    (target / "settings.toml").write_text(settings)
    (target / "demand.csv").write_text(
        "office,skill,period,hours\nA,review,2027-Q1,2087\nB,review,2027-Q2,521.75\n")
    instance = read_instance(target)
    assert [d.fte for d in instance.demand] == pytest.approx([4.0, 1.0])
    assert [d.hours for d in instance.demand] == [2087.0, 521.75]


def test_explicit_periods_with_their_own_hours(tmp_path):
    target = overlay(BAD / "empty_demand", tmp_path / "i")
    (target / "settings.toml").write_text(
        '[horizon]\nperiods_per_year = 2\n'
        '[[horizon.periods]]\nname = "H1"\nyear = "2027"\nhours_per_fte = 900\n'
        '[[horizon.periods]]\nname = "H2"\nyear = "2027"\nhours_per_fte = 850\n')
    (target / "demand.csv").write_text("office,skill,period,hours\nA,review,H1,900\n"
                                       "A,review,H2,425\n")
    (target / "staff.csv").write_text("person,home_office,fte,skills\nx,A,1,review\n")
    instance = read_instance(target)
    assert [d.fte for d in instance.demand] == pytest.approx([1.0, 0.5])
    assert instance.periods_per_year == 2


def test_warnings_do_not_stop_a_solve(tmp_path):
    target = overlay(BAD / "empty_demand", tmp_path / "i")
    (target / "demand.csv").write_text("office,skill,period,fte\nA,review,2027-Q1,1\n"
                                       "A,intake,2027-Q2,0.5\n")
    (target / "staff.csv").write_text("person,home_office,fte,skills\nx,A,1,review\n")
    instance = read_instance(target)
    text = "\n".join(instance.warnings)
    assert "nobody on staff has skill 'intake'" in text
    assert "offices.csv:3: office: nobody on staff is based at 'B'" in text
    # Demand in Q1 and Q2 only: Q3 and Q4 have no rows (hand count of the rows above).
    assert ("demand.csv: period: no rows for 2027-Q3 and 2027-Q4, while other periods have "
            "some: were rows left out?") in text
    # Staff at B, demand at A only: B's people can only be sent away or idle (a history of
    # two offices written over six's demand had left four without rows, unsaid).
    (target / "staff.csv").write_text("person,home_office,fte,skills\nx,A,1,review\n"
                                      "y,B,1,review\n")
    text = "\n".join(read_instance(target).warnings)
    assert ("offices.csv:3: office: no demand rows for 'B', where staff are based: its people "
            "can only be detailed out or left idle; were rows left out?") in text
    assert "'A', where staff" not in text and "based at 'B'" not in text


def test_a_time_to_hire_warning_names_the_skills_own_row(tmp_path):
    # A code review: the row was counted from the skills read, so a blank line (or a
    # workbook's header below row 1) shifted it. Hand count: header 1, blank 2, review 3.
    target = overlay(BAD / "empty_demand", tmp_path / "i")
    shutil.copy(DATA / "tiny" / "demand.csv", target / "demand.csv")
    (target / "skills.csv").write_text("skill,salary_per_period,onboarding_cost,time_to_hire,"
                                       "ramp\n\nreview,20000,8000,9,0.5\nintake,15000,5000,1,\n")
    warnings = [w for w in read_instance(target).warnings if ": time_to_hire: " in w]
    assert warnings == ["skills.csv:3: time_to_hire: 9 periods for 'review' is the whole "
                        "horizon (4 periods) or more: no hire of it can start"]


SEATS = DATA / "seats_short"


def seats_variant(tmp_path: Path, settings: tuple[str, str] | None = None,
                  staff: tuple[str, str] | None = None, offices: tuple[str, str] | None = None
                  ) -> Path:
    """The seats_short instance with one text replaced in each file named."""
    target = tmp_path / "i"
    shutil.copytree(SEATS, target)
    for name, change in (("settings.toml", settings), ("staff.csv", staff),
                         ("offices.csv", offices)):
        if change is not None:
            text = (target / name).read_text()
            assert change[0] in text
            (target / name).write_text(text.replace(change[0], change[1]))
    return target


def seat_warnings(folder: Path) -> list[str]:
    return [w for w in read_instance(folder).warnings if ": seats: " in w]


def test_people_based_beyond_the_seats_are_said_with_how_many_must_be_away(tmp_path):
    # Hand count (tests/data/seats_short/NOTE.md): A has 2 seats; a1-a5 are based there in
    # 2027-Q1 and Q2 (5 > 2: 3 must be away), a5 leaves after Q2 (4 > 2 in Q3, Q4). May go
    # in Q1: a5 reassigned (1) + detailable a1, a2 up to floor(0.5 x (5 - 1)) = 2: 3 >= 3,
    # so no "no plan". B: 1 person, 10 seats: nothing said.
    assert seat_warnings(SEATS) == [
        "offices.csv:2: seats: 'A' has 5 people based there in 2027-Q1 for 2 seats, and more "
        "than 2 in 3 more periods: at least 3 must be away then (detailed out or reassigned)"]
    # The model agrees that 3 may go: a plan exists (3 away in Q1, Q2; 2 in Q3, Q4).
    assert main(["plan", str(SEATS), "-o", str(tmp_path / "out"), "-q"]) == 0


def test_too_few_may_go_for_the_seats_is_said_and_the_plan_is_infeasible(tmp_path):
    # Share 0.25: may go in Q1 = 1 (a5) + min(2, floor(0.25 x 4) = 1) = 2 < 3 must.
    target = seats_variant(tmp_path, settings=("max_away_share = 0.5", "max_away_share = 0.25"))
    assert seat_warnings(target) == [
        "offices.csv:2: seats: 'A' has 5 people based there in 2027-Q1 for 2 seats, and more "
        "than 2 in 3 more periods: at least 3 must be away then (detailed out or reassigned), "
        "and only 2 may go (can_detail, can_relocate, max_away_share): no plan can keep its "
        "seats"]
    code = main(["plan", str(target), "-o", str(tmp_path / "out"), "-q"])
    assert code == EXIT_INFEASIBLE


def test_seats_over_every_period_alike_and_no_details_allowed(tmp_path):
    # a5 stays: 5 based in all 4 periods, 3 must be away each; with no details at all
    # (max_consecutive_detail_periods = 0) only a5, reassigned, may go: 1 < 3.
    target = seats_variant(tmp_path, staff=("true,true,2027-Q2", "true,true,"),
                           settings=("[policy]", "[policy]\nmax_consecutive_detail_periods = 0"))
    assert seat_warnings(target) == [
        "offices.csv:2: seats: 'A' has 5 people based there in 2027-Q1 (and 3 more periods) "
        "for 2 seats: at least 3 must be away each period (detailed out or reassigned), and "
        "only 1 may go (can_detail, can_relocate, max_consecutive_detail_periods = 0, "
        "max_away_share): no plan can keep its seats"]


def test_no_seat_warning_where_the_seats_suffice(tmp_path, tiny):
    # 5 seats for at most 5 people based at A (boundary: 5 <= 5); fte does not count, heads do.
    assert seat_warnings(seats_variant(tmp_path, offices=("A,Alder,2,0", "A,Alder,5,0"))) == []
    # tiny: A has 10 seats for 3, B 6 for 1; every period has demand.
    assert not [w for w in tiny.warnings if ": seats: " in w or ": period: " in w]


def test_instance_is_read_only(tiny):
    with pytest.raises(TypeError):
        tiny.vacancies[("A", "review")] = 3  # type: ignore[index]
    with pytest.raises(AttributeError):
        tiny.name = "other"  # type: ignore[misc]


def test_one_fault_on_many_rows_is_listed_ten_times_and_counted(tmp_path):
    # A value no row may hold, on a hundred rows (a sweep's workbook: 675 problems, nearly
    # all alike); each row is still counted.
    from conftest import ROOT

    from rebalance.readers import count_problems

    demo = tmp_path / "demo"
    shutil.copytree(ROOT / "instances" / "demo", demo)
    staff = (demo / "staff.csv").read_text()
    (demo / "staff.csv").write_text(staff.replace(",false,false,", ",maybe,false,"))
    staff_rows = staff.count(",false,false,")
    with pytest.raises(InstanceError) as caught:
        read_instance(demo)
    text = [str(p) for p in caught.value.problems]
    named = [t for t in text if t.startswith("staff.csv") and "'maybe'" in t]
    assert staff_rows > 11 and len(named) == 11
    assert named[-1].endswith(f"(and {staff_rows - 10} more rows like this)")
    assert count_problems(caught.value.problems) == staff_rows


def test_a_name_unknown_in_many_rows_is_one_line_saying_where(tmp_path, capsys):
    # Deleting one skill had drawn 88 lines: ten per file, then "(and 29 more rows like
    # this)" at the end, none saying the fix is one row in skills.csv.
    from conftest import ROOT

    demo = tmp_path / "demo"
    shutil.copytree(ROOT / "instances" / "demo", demo)
    skills = (demo / "skills.csv").read_text().splitlines(keepends=True)
    (demo / "skills.csv").write_text("".join(s for s in skills
                                             if not s.startswith("inspection,")))
    assert main(["check", str(demo)]) == EXIT_INVALID_INPUT
    err = capsys.readouterr().err
    # Rows counted by hand: `grep -n inspection staff.csv` (39 lines, from 29),
    # `grep -n ,inspection, demand.csv` (48, from 10), `grep -n inspection attrition.csv` (9).
    assert ": 88 problems in the input" in err
    lines = [line.strip() for line in err.splitlines() if "'inspection'" in line]
    assert lines == [
        "staff.csv:29: skills: skill 'inspection' is not in skills.csv but is named in 88 "
        "rows, each counted as a problem: staff.csv (39 rows: 29, 39, 40, 41, 42 and 34 more), "
        "demand.csv (48 rows: 10, 11, 12, 13, 14 and 43 more), attrition.csv (1 row: 9); add "
        "it to skills.csv or correct those rows"]
    assert "more rows like this" not in err


def test_a_renamed_office_is_one_line_with_the_name_it_may_have_become(tmp_path):
    # A renamed office leaves every row naming the old name unknown: one line, with the new
    # name offered.
    from conftest import ROOT

    demo = tmp_path / "demo"
    shutil.copytree(ROOT / "instances" / "demo", demo)
    offices = (demo / "offices.csv").read_text()
    (demo / "offices.csv").write_text(offices.replace("hollin-cross,", "hollin-crossing,"))
    staff_rows = (demo / "staff.csv").read_text().count(",hollin-cross,")
    with pytest.raises(InstanceError) as caught:
        read_instance(demo)
    named = [str(p) for p in caught.value.problems if "'hollin-cross'" in p.message]
    assert len(named) == 1 and named[0].startswith("staff.csv:")
    assert f"staff.csv ({staff_rows} rows: " in named[0]
    assert named[0].endswith("add it to offices.csv or correct those rows (did you mean "
                             "'hollin-crossing'?)")


def test_a_name_unknown_in_two_rows_keeps_a_line_per_row(tmp_path):
    target = overlay(BAD / "empty_demand", tmp_path / "i")
    (target / "demand.csv").write_text("office,skill,period,fte\nA,reviw,2027-Q1,1\n"
                                       "A,reviw,2027-Q2,1\n")
    assert _problems(target) == [
        f"demand.csv:{row}: skill: unknown skill 'reviw'; expected one listed in skills.csv "
        "(did you mean 'review'?)" for row in (2, 3)]


def _problems(target: Path) -> list[str]:
    with pytest.raises(InstanceError) as caught:
        read_instance(target)
    return [str(p) for p in caught.value.problems if not p.is_warning]


def test_one_fault_in_a_table_that_names_things_is_said_once(tmp_path):
    # Each had drawn a problem per row that names an office, skill or period (a docs audit:
    # 162 "unknown office" lines for one renamed header on the demo).
    cases = {
        "offices.csv": ("office,location,", "office,place,"),       # a required column renamed
        "skills.csv": ("review,20000,", "review,20k,"),             # one bad cell in a row
        "settings.toml": ("[policy]", "[policy"),                   # not TOML
    }
    for i, (file, (old, new)) in enumerate(cases.items()):
        target = overlay(BAD / "empty_demand", tmp_path / f"i{i}")
        shutil.copy(DATA / "tiny" / "demand.csv", target / "demand.csv")
        (target / file).write_text((target / file).read_text().replace(old, new))
        problems = _problems(target)
        assert len(problems) == 1, problems
        assert problems[0].startswith(file)


def test_a_byte_order_mark_in_settings_is_read(tmp_path):
    target = valid_copy(tmp_path)
    settings = target / "settings.toml"
    settings.write_bytes(b"\xef\xbb\xbf" + settings.read_bytes())
    assert len(read_instance(target).periods) == 4


def test_a_setting_nothing_reads_is_a_warning_and_true_is_no_number(tmp_path):
    target = valid_copy(tmp_path)
    settings = target / "settings.toml"
    text = settings.read_text()
    settings.write_text(text + "\n[extras]\nflag = 1\n[policy.more]\nwidth = 2\n")
    warnings = read_instance(target).warnings
    assert ("settings.toml: policy.more: unknown key, ignored (expected one of: "
            "max_away_share, max_consecutive_detail_periods)") in warnings
    assert any(w.startswith("settings.toml: extras: unknown section") for w in warnings)
    settings.write_text(text.replace("hours_per_fte = 480", "hours_per_fte = true"))
    # TOML's own spelling: 'True' is a word the file does not hold (a docs sweep).
    assert _problems(target) == [
        "settings.toml: horizon.hours_per_fte: 'true' is not valid; expected a number > 0"]


def test_a_blank_proficiency_is_one_and_every_bad_budget_cell_is_said(tmp_path):
    target = valid_copy(tmp_path)
    staff = target / "staff.csv"
    staff.write_text(staff.read_text().replace("a1,A,1.0,review:1.0", "a1,A,1.0,review:"))
    a1 = next(p for p in read_instance(target).staff if p.person == "a1")
    assert a1.skills == (("review", 1.0),)
    (target / "budget.csv").write_text("year,hiring,moves\n2031,lots,-5\n2027,-5,\n")
    problems = _problems(target)
    assert problems == [
        "budget.csv:2: hiring: 'lots' is not a number; expected a number >= 0",
        "budget.csv:2: moves: '-5' is out of range; expected a number >= 0",
        "budget.csv:2: year: budget year '2031' belongs to no period; expected one of 2027",
        "budget.csv:3: hiring: '-5' is out of range; expected a number >= 0"]


def test_a_count_of_problems_counts_the_rows_a_repeat_stands_for():
    from rebalance.problems import Problem
    from rebalance.readers import count_problems
    from rebalance.tables import collapse_repeats

    problems = [Problem("staff.csv", row, "home_office", "unknown office 'X'")
                for row in range(2, 17)]
    listed = collapse_repeats(problems)
    assert len(listed) == 11 and count_problems(listed) == 15


def test_a_name_unknown_in_many_rows_is_grouped_on_the_name_the_problem_carries():
    # The one line for a name unknown in many rows is built from the name each problem
    # carries (Problem.unknown_name), not from its words: a message that reads alike but
    # carries no name is listed as it is.  Counts by hand: 3 rows, UNKNOWN_NAME_ROWS is 3.
    from rebalance.problems import Problem, UnknownName
    from rebalance.tables import UNKNOWN_NAME_ROWS, collapse_repeats

    name = UnknownName("skill", "intake", "skills.csv", " (did you mean 'intakes'?)")
    carried = [Problem("staff.csv", row, "skills", name.message, unknown_name=name)
               for row in range(2, 2 + UNKNOWN_NAME_ROWS)]
    [line] = collapse_repeats(carried)
    assert (line.row, line.repeats) == (2, UNKNOWN_NAME_ROWS)
    assert line.message == ("skill 'intake' is not in skills.csv but is named in 3 rows, each "
                            "counted as a problem: staff.csv (3 rows: 2, 3, 4); add it to "
                            "skills.csv or correct those rows (did you mean 'intakes'?)")
    alike = [Problem("staff.csv", p.row, p.column, p.message) for p in carried]
    assert collapse_repeats(alike) == alike


def test_settings_numbers_are_finite_and_shortfall_cost_is_bounded(tmp_path):
    # A sweep of weighted mode: shortfall_cost = inf passed check and then every solve ended
    # in a solver error; 1e100 made CBC call a feasible model infeasible.
    target = valid_copy(tmp_path)
    settings = target / "settings.toml"
    text = settings.read_text()
    for line, expected in (
            ("shortfall_cost = inf", "objective.shortfall_cost: 'inf' is not valid; expected a "
                                     "number from 0 to 1,000,000,000,000"),
            ("shortfall_cost = 1e13", "objective.shortfall_cost: '10,000,000,000,000' is not "
                                      "valid"),
            ("time_limit_seconds = nan", "solver.time_limit_seconds: 'nan' is not valid")):
        section = "[solver]" if "time_limit" in line else "[objective]"
        settings.write_text(text.replace(section, "") + f"\n{section}\n{line}\n")
        problems = _problems(target)
        assert len(problems) == 1 and expected in problems[0], problems
    settings.write_text(text.replace("hours_per_fte = 480", "hours_per_fte = inf"))
    assert _problems(target) == ["settings.toml: horizon.hours_per_fte: 'inf' is not valid; "
                                 "expected a number > 0"]


def test_big_and_small_settings_numbers_are_echoed_as_a_planner_writes_them(tmp_path):
    # A sweep: shortfall_cost = 1e13 came back as '1e+13' (Python's spelling) against a bound
    # of "1e+12".  Hand arithmetic: 1e13 is 10^13, 1 and 13 zeros; 1e12 is 1 and 12 zeros;
    # 1e300 has 301 digits, so it keeps TOML's short spelling (TOML 1.0.0 spec, "Float":
    # "an exponent part ... an E (upper or lower case), followed by an integer part").
    target = valid_copy(tmp_path)
    settings = target / "settings.toml"
    text = settings.read_text()
    for line, shown, bound in (
            ("shortfall_cost = 1e13", "'10,000,000,000,000'", "from 0 to 1,000,000,000,000"),
            ("shortfall_cost = 1e300", "'1e300'", "from 0 to 1,000,000,000,000"),
            ("shortfall_tolerance = 0.1234567", "'0.1234567'", "from 0 to 0.1"),
            ("shortfall_tolerance = -2.5e-7", "'-2.5e-7'", "from 0 to 0.1")):
        settings.write_text(text.replace("[objective]", "") + f"\n[objective]\n{line}\n")
        problems = _problems(target)
        assert len(problems) == 1, problems
        assert f"{shown} is not valid; expected a number {bound}" in problems[0]
        assert "e+" not in problems[0]


@pytest.mark.parametrize(("value", "expected"), [
    # Hand-written: 10^13 with separators every three digits, as money_text writes amounts.
    (1e13, "10,000,000,000,000"), (10**13, "10,000,000,000,000"),
    (-1e12, "-1,000,000,000,000"), (400, "400"), (0.0, "0"), (-0.0, "0"),
    # Every digit given, not :g's six (0.1234567 had read 0.123457).
    (0.1234567, "0.1234567"), (1234567.5, "1,234,567.5"),
    # From PLAIN_BELOW (10^15) up and below 10^-4: TOML's exponent spelling, no "+" or 0s.
    (1e15, "1e15"), (1e18, "1e18"), (1e300, "1e300"), (10**400, "1e400"), (2.5e-7, "2.5e-7"),
    (float("inf"), "inf"), (float("nan"), "nan"),
])
def test_plain_number_writes_an_input_number_readably(value, expected):
    assert plain_number(value) == expected


def test_the_count_of_problems_includes_the_rows_a_repeat_stands_for(tmp_path, capsys):
    # A docs audit: 15 rows with one fault were headed "11 problem(s)" (ten listed, one line
    # for the rest).
    target = valid_copy(tmp_path)
    staff = target / "staff.csv"
    staff.write_text(staff.read_text() + "".join(f"x{i},A,2,review:1.0,,,\n"
                                                 for i in range(15)))
    assert main(["check", str(target)]) == EXIT_INVALID_INPUT
    err = capsys.readouterr().err
    assert ": 15 problems in the input" in err and "(and 5 more rows like this)" in err


def test_check_does_not_say_nothing_was_written_but_plan_does(tmp_path, capsys):
    # A planner's reading: check writes nothing ever, so "; nothing was written" read oddly.
    target = overlay(BAD / "empty_demand", tmp_path / "i")
    assert main(["check", str(target)]) == EXIT_INVALID_INPUT
    err = capsys.readouterr().err
    assert f"{target}: 1 problem in the input\n" in err and "nothing was written" not in err
    assert main(["plan", str(target), "-o", str(tmp_path / "out"), "-q"]) == EXIT_INVALID_INPUT
    err = capsys.readouterr().err
    assert f"{target}: 1 problem in the input; nothing was written" in err
    assert not (tmp_path / "out").exists()


def test_a_names_table_not_utf8_and_a_huge_integer_are_said_once(tmp_path):
    # A review: an offices.csv not UTF-8 still drew 13 "unknown
    # office" lines (its problem names the bad line, not row 1), and a 400-digit integer in
    # settings raised OverflowError (an internal error).
    target = valid_copy(tmp_path)
    offices = target / "offices.csv"
    offices.write_bytes(offices.read_bytes().replace(b"Birch", b"Birch\xf6"))
    problems = _problems(target)
    assert len(problems) == 1 and problems[0].startswith("offices.csv:3: is not UTF-8"), problems
    shutil.copy(DATA / "tiny" / "offices.csv", offices)
    settings = target / "settings.toml"
    settings.write_text(settings.read_text().replace("hours_per_fte = 480",
                                                     "hours_per_fte = 1" + "0" * 400)
                        + "\n[objective]\nshortfall_cost = 1" + "0" * 400 + "\n")
    problems = _problems(target)
    assert len(problems) == 2 and all("settings.toml" in p for p in problems), problems


def test_a_currency_is_read_stripped_and_carried_on_the_instance(tmp_path):
    target = valid_copy(tmp_path)
    assert read_instance(target).money.currency is None  # none given: amounts stay bare
    settings = target / "settings.toml"
    text = settings.read_text()
    for given, read in (('"EUR"', "EUR"), ('" € "', "€"), ('"kr."', "kr."), ('"US$"', "US$")):
        settings.write_text(text + f"\n[money]\ncurrency = {given}\n")
        instance = read_instance(target)
        assert instance.money.currency == read
        assert not any("money" in w for w in instance.warnings)
    with pytest.raises(AttributeError):
        instance.money.currency = "USD"  # type: ignore[misc]  # frozen like every setting


def test_every_bad_currency_is_said_with_its_key_and_what_is_expected(tmp_path):
    target = valid_copy(tmp_path)
    settings = target / "settings.toml"
    text = settings.read_text()
    expected = ("is not valid; expected text of 1 to 5 characters without spaces, such as "
                '"EUR", "USD" or "€"')
    for given, shown in (('"EUROS!"', "EUROS!"), ('""', ""), ('"  "', "  "), ("978", "978"),
                         ('"US D"', "US D"), ('"E\\tR"', "E\tR"), ("true", "true")):
        settings.write_text(text + f"\n[money]\ncurrency = {given}\n")
        assert _problems(target) == [f"settings.toml: money.currency: '{shown}' {expected}"]
    # With other bad settings, all at once; a misspelt key is a warning naming the right one.
    settings.write_text(text + '\n[money]\ncurrency = "EURO"\ncurency = "EUR"\n')
    warnings = read_instance(target).warnings
    assert ("settings.toml: money.curency: unknown key, ignored (expected one of: currency) "
            "(did you mean 'currency'?)" in warnings)
    settings.write_text(text.replace("max_away_share = 0.5", "max_away_share = 2")
                        + '\n[money]\ncurrency = "EURO DOLLAR"\n')
    problems = _problems(target)
    assert len(problems) == 2 and problems[0].startswith("settings.toml: policy.max_away_share")
    assert problems[1].startswith("settings.toml: money.currency: 'EURO DOLLAR' is not valid")
    settings.write_text("money = 5\n" + text)  # a top-level key: before any [section]
    assert _problems(target) == ["settings.toml: money: must be a table"]


EXPLICIT_PERIODS = "".join(f'[[horizon.periods]]\nname = "2027-Q{q}"\nyear = "2027"\n'
                           for q in range(1, 5))


def _with_explicit_periods(tmp_path: Path, entry_2: str, default: str = "480") -> Path:
    """The tiny instance with its quarters listed one by one, the second as ``entry_2``."""
    target = valid_copy(tmp_path)
    text = (target / "settings.toml").read_text()
    text = text.replace('start = "2027-Q1"\ncount = 4\n', "")
    text = text.replace("hours_per_fte = 480", f"hours_per_fte = {default}" if default else "")
    listed = EXPLICIT_PERIODS.replace('name = "2027-Q2"\nyear = "2027"\n', entry_2)
    (target / "settings.toml").write_text(text.replace("[policy]", listed + "\n[policy]"))
    return target


def test_one_unreadable_period_entry_is_said_once_naming_what_it_holds(tmp_path):
    # A docs sweep: hours_per_fte = -3 on one entry, or its year left out, also drew "unknown
    # period" from every staff and demand row naming that period (10 problems for one), and
    # the message said "is missing ... (no default given)" of a value present with a default.
    year = "the budget year its spending falls in, as text such as \"FY27\""
    for i, (entry, expected) in enumerate((
            ('name = "2027-Q2"\nyear = "2027"\nhours_per_fte = -3\n',
             "horizon.periods[2].hours_per_fte: '-3' is not valid; expected a number > 0"),
            ('name = "2027-Q2"\n', f"horizon.periods[2].year: is missing; expected {year}"),
            ('name = "2027-Q2"\nyear = true\n',
             f"horizon.periods[2].year: 'true' is not valid; expected {year}"),
            ('year = "2027"\n', "horizon.periods[2].name: is missing; expected the period's "
                                "name, as text such as \"FY27-P1\""))):
        target = _with_explicit_periods(tmp_path / str(i), entry)
        assert _problems(target) == [f"settings.toml: {expected}"]
    # With no default, each entry without its own hours says so, and how to give them.
    target = _with_explicit_periods(tmp_path / "none", 'name = "2027-Q2"\nyear = "2027"\n'
                                    'hours_per_fte = 400\n', default="")
    problems = _problems(target)
    assert len(problems) == 3 and problems[0] == (
        "settings.toml: horizon.periods[1].hours_per_fte: is missing and horizon.hours_per_fte "
        "gives no default; expected a number > 0 here or in horizon.hours_per_fte")
    # The period that could not be read still has its name: a row naming another is unknown.
    target = _with_explicit_periods(tmp_path / "other", 'name = "2027-Q2"\n')
    (target / "demand.csv").write_text("office,skill,period,fte\nA,review,2027-Q2,1\n"
                                       "A,review,2031-Q1,1\n")
    assert _problems(target)[1:] == ["demand.csv:3: period: unknown period '2031-Q1'; "
                                     "expected one listed in settings.toml (2027-Q1 to 2027-Q4) "
                                     "(did you mean '2027-Q1'?)"]


def test_periods_listed_with_start_and_count_warn_that_those_are_ignored(tmp_path):
    target = _with_explicit_periods(tmp_path, 'name = "2027-Q2"\nyear = "2027"\n')
    settings = target / "settings.toml"
    settings.write_text(settings.read_text().replace("[horizon]\n",
                                                     '[horizon]\nstart = "2030-Q1"\ncount = 2\n'))
    instance = read_instance(target)
    assert [p.name for p in instance.periods] == [f"2027-Q{q}" for q in range(1, 5)]
    for key in ("start", "count"):
        assert (f"settings.toml: horizon.{key}: ignored, as horizon.periods lists the periods; "
                "expected either [[horizon.periods]] or start and count, not both"
                in instance.warnings)


def test_a_whole_float_is_a_whole_number_in_settings_as_in_cells(tmp_path):
    # A docs sweep: count = 4.0 was refused though a cell of 2.0 reads as whole.
    target = valid_copy(tmp_path)
    settings = target / "settings.toml"
    text = settings.read_text().replace("count = 4", "count = 4.0").replace(
        "max_consecutive_detail_periods = 2", "max_consecutive_detail_periods = 2.0")
    settings.write_text(text.replace("[horizon]", "[horizon]\nperiods_per_year = 4.0")
                        + "threads = 2.0\nseed = 7.0\n")
    instance = read_instance(target)
    assert len(instance.periods) == 4 and instance.periods_per_year == 4
    assert (instance.solver.threads, instance.solver.seed) == (2, 7)
    assert instance.policy.max_consecutive_detail_periods == 2
    assert all(type(v) is int for v in (instance.periods_per_year, instance.solver.threads,
                                        instance.solver.seed,
                                        instance.policy.max_consecutive_detail_periods))
    settings.write_text(text.replace("count = 4.0", "count = 4.5") + "threads = true\n")
    assert _problems(target) == [
        "settings.toml: horizon.count: '4.5' is not valid; expected a whole number from 1 to 400",
        "settings.toml: solver.threads: 'true' is not valid; expected a whole number >= 1"]
    # A typo of 1e18 quarters had the reader try to list that many periods.
    settings.write_text(text.replace("count = 4.0", "count = 1e18"))
    assert _problems(target) == [
        "settings.toml: horizon.count: '1e18' is not valid; expected a whole number from 1 to "
        "400"]


def test_an_unclosed_quote_is_one_problem_on_one_line(tmp_path):
    # A docs sweep: in budget.csv the swallowed text came back as a second error, newline and
    # all, with a warning that the swallowed year had no row; in offices.csv every staff row
    # naming a swallowed office was unknown.
    target = valid_copy(tmp_path)
    settings = target / "settings.toml"
    settings.write_text(settings.read_text().replace("count = 4", "count = 8"))
    (target / "budget.csv").write_text('year,hiring,moves\n2027,"40000,30000\n2028,1,1\n')
    with pytest.raises(InstanceError) as caught:
        read_instance(target)
    assert [str(p) for p in caught.value.problems] == [
        "budget.csv:2: hiring: runs over several lines (a quote that is not closed?); "
        "expected one line per row"]
    shutil.copy(DATA / "tiny" / "budget.csv", target / "budget.csv")
    shutil.copy(BAD / "unclosed_quote" / "offices.csv", target / "offices.csv")
    assert _problems(target) == [
        "offices.csv:2: location: runs over several lines (a quote that is not closed?); "
        "expected one line per row"]


def _staff_variant(tmp_path: Path, old: str, new: str) -> Path:
    """The tiny instance with an office 'birch-north' added and ``old`` in staff.csv made
    ``new``."""
    target = valid_copy(tmp_path)
    offices = target / "offices.csv"
    offices.write_text(offices.read_text().rstrip("\n") + "\nbirch-north,Birch,6,1\n")
    staff = target / "staff.csv"
    assert old in staff.read_text()
    staff.write_text(staff.read_text().replace(old, new))
    return target


def test_a_misspelt_office_is_said_with_the_name_it_is_close_to(tmp_path):
    target = _staff_variant(tmp_path, "b1,B,", "b1,birch-nrth,")
    assert _problems(target) == [
        "staff.csv:5: home_office: unknown office 'birch-nrth'; expected one listed in "
        "offices.csv (did you mean 'birch-north'?)"]


def test_a_name_close_to_none_is_said_without_a_suggestion(tmp_path):
    target = _staff_variant(tmp_path, "b1,B,", "b1,harbourside,")
    assert _problems(target) == [
        "staff.csv:5: home_office: unknown office 'harbourside'; expected one listed in "
        "offices.csv"]


def test_a_misspelt_column_is_an_error_saying_what_its_absence_leaves(tmp_path):
    # A reviewer's check: a misspelt optional column (can_detial) had been a warning, and the
    # plan was made as if the column were not there (everyone detailable).  Which names are
    # close is difflib's ratio (Python's difflib documentation, get_close_matches); what a
    # missing column means is docs/instance-format.md's tables.
    target = _staff_variant(tmp_path, "can_detail,", "can_detial,")
    assert _problems(target) == [
        "staff.csv:1: can_detial: unknown column 'can_detial' (did you mean can_detail?); "
        "without a can_detail column everyone may be detailed (true)"]
    # Beside the column it is close to, nothing is left out: a warning, as is a column of
    # notes close to no column, or one only as close as "notes" is to "moves" (0.6).
    staff = target / "staff.csv"
    staff.write_text("person,home_office,fte,skills,can_detail,can_detial,notes\n"
                     "a1,A,1.0,review:1.0,true,no,new in March\nb1,B,1.0,review:1.0,,,\n")
    budget = target / "budget.csv"
    budget.write_text("year,hiring,notes\n2027,40000,agreed\n")
    assert [w for w in read_instance(target).warnings if "unknown column" in w] == [
        "staff.csv:1: can_detial: unknown column (expected one of: person, home_office, "
        "fte, skills, can_detail, can_relocate, last_period) (did you mean 'can_detail'?)",
        "staff.csv:1: notes: unknown column (expected one of: person, home_office, fte, "
        "skills, can_detail, can_relocate, last_period)",
        "budget.csv:1: notes: unknown column (expected one of: year, hiring, moves) (did you "
        "mean 'moves'?)"]


def test_notes_columns_a_review_found_refused_are_warnings(tmp_path):
    # A review of the misspelt-column rule: columns of notes sharing a known column's first
    # letters (last_updated, hiring_manager, primary), one named like the alternative to fte
    # (hours_basis beside fte) and two notes alike but for case (Note, note) had been
    # refused; each is read by nothing, so each is a warning at most.
    target = _staff_variant(tmp_path, "can_detail,", "can_detail,")
    staff = target / "staff.csv"
    lines = staff.read_text().splitlines()
    staff.write_text("\n".join([lines[0].replace(",last_period", ",last_updated"),
                                *lines[1:]]) + "\n")
    (target / "budget.csv").write_text("year,hiring,moves,hiring_manager,Note,note\n"
                                       "2027,40000,30000,J. Doe,agreed,in March\n")
    demand = target / "demand.csv"
    rows = demand.read_text().splitlines()
    demand.write_text("\n".join([f"{rows[0]},hours_basis,primary",
                                 *(f"{row},timesheets 2026,x" for row in rows[1:])]) + "\n")
    instance = read_instance(target)  # no error: it reads
    said = [w for w in instance.warnings if "unknown column" in w]
    assert [w.split(": ")[1] for w in said] == [
        "last_updated", "hours_basis", "primary", "hiring_manager", "Note", "note"]


def test_an_fte_out_of_range_says_the_range_in_plain_words(tmp_path):
    target = _staff_variant(tmp_path, "a1,A,1.0,", "a1,A,1.5,")
    assert _problems(target) == [
        "staff.csv:2: fte: '1.5' is out of range; expected a number above 0 and at most 1"]


def test_suggestions_ignore_case_and_ranges_read_as_words():
    from rebalance.problems import did_you_mean, range_words

    # Python's documentation of difflib.get_close_matches: "appel" -> ['apple', 'ape'].
    assert did_you_mean("appel", ["ape", "apple", "peach", "puppy"]) == (
        " (did you mean 'apple' or 'ape'?)")
    assert did_you_mean("alder", ["Alder", "Birch"]) == " (did you mean 'Alder'?)"
    assert did_you_mean("Z", ["A", "B"]) == ""
    assert range_words(0, 1, open_maximum=True) == "a number at least 0 and below 1"
    assert range_words(1, 90, integer=True) == "a whole number from 1 to 90"
    assert range_words(0, None, open_minimum=True) == "a number > 0"


def test_weighted_mode_with_free_shortfall_is_a_warning(tmp_path):
    target = tmp_path / "tiny"
    shutil.copytree(DATA / "tiny", target)
    settings = target / "settings.toml"
    settings.write_text(settings.read_text() + '\n[objective]\nmode = "weighted"\n'
                        "shortfall_cost = 0\n")
    assert any(w.startswith("settings.toml: objective.shortfall_cost: is 0, so the weighted "
                            "objective prices money only") for w in read_instance(target).warnings)
    settings.write_text(settings.read_text().replace("shortfall_cost = 0", "shortfall_cost = 1"))
    assert not any("shortfall_cost" in w for w in read_instance(target).warnings)


def test_a_number_in_quotes_is_said_to_be_text(tmp_path):
    # Sweep: hours_per_fte = "450" read "'450' is not valid; expected a number > 0", the
    # quotes unsaid.  TOML 1.0 (toml.io, "String"): anything in quotes is a string.
    target = valid_copy(tmp_path)
    settings = target / "settings.toml"
    text = settings.read_text().replace("hours_per_fte = 480", 'hours_per_fte = "450"')
    settings.write_text(text.replace("max_away_share = 0.5", 'max_away_share = "0.5"'))
    assert _problems(target) == [
        'settings.toml: horizon.hours_per_fte: "450" is text in quotes, not a number (remove '
        'the quotes); expected a number > 0',
        'settings.toml: policy.max_away_share: "0.5" is text in quotes, not a number (remove '
        'the quotes); expected a number from 0 to 1']


def _tiny_with(tmp_path: Path, **texts: tuple[str, str]) -> Path:
    """A copy of tiny with, in each file named (``settings_toml=("a", "b")``), ``a`` replaced
    by ``b``."""
    target = tmp_path / "tiny"
    shutil.copytree(DATA / "tiny", target)
    for name, (old, new) in texts.items():
        path = target / name.replace("_", ".")
        path.write_text(path.read_text().replace(old, new))
    return target


def test_a_one_period_horizon_is_named_once(tmp_path):
    # "(2027-Q1 to 2027-Q1)" had named the one period as a span.
    target = _tiny_with(tmp_path, settings_toml=("count = 4", "count = 1"),
                        staff_csv=(",2027-Q3", ","))
    (target / "demand.csv").write_text("office,skill,period,fte\nA,review,2027-Q1,1\n"
                                       "A,review,2027-Q2,1\n")
    assert _problems(target) == ["demand.csv:3: period: unknown period '2027-Q2'; expected one "
                                 "listed in settings.toml (2027-Q1) (did you mean '2027-Q1'?)"]


def test_an_unusable_skill_name_is_not_offered_as_what_was_meant(tmp_path):
    # 're view' cannot be named in staff.csv (skills are separated by spaces): "unknown skill
    # 'review' (did you mean 're view'?)" pointed at a name no row could use.
    problems = _problems(_tiny_with(tmp_path, skills_csv=("\nreview,", "\nre view,")))
    assert problems[0].startswith("skills.csv:2: skill: 're view' is not a usable skill name")
    assert [p for p in problems if p.startswith("staff.csv:2: skills: skill 'review' is not in "
                                                 "skills.csv but is named in")]
    assert not [p for p in problems if "did you mean 're view'" in p]


def test_a_semicolon_file_is_one_problem_and_trailing_commas_on_every_row_are_not(tmp_path):
    # A planner's first run: a budget.csv saved by a spreadsheet set up for decimal commas
    # had drawn "year: required column is missing" beside an unknown column "year;hiring;moves".
    semicolons = overlay(BAD / "semicolons", tmp_path / "semi")
    assert _problems(semicolons) == [
        "budget.csv:1: columns are separated by ';'; expected commas (in a spreadsheet program: "
        "save as CSV, comma delimited)"]
    # An empty cell past the header on every row (an export's trailing comma) reads as before.
    target = _tiny_with(tmp_path, offices_csv=("A,Alder,10,1\nB,Birch,6,1\n",
                                               "A,Alder,10,1,\nB,Birch,6,1,\n"))
    offices = read_instance(target).offices
    assert [(o.seats, o.max_hires_per_period) for o in offices] == [(10, 1), (6, 1)]


def test_a_time_to_hire_of_the_whole_horizon_is_warned(tmp_path):
    # A planner's first run: a time_to_hire of 9 on an 8-quarter horizon passed in silence,
    # though no hire of that skill can then start (docs/model.md: start index >= time_to_hire).
    target = _tiny_with(tmp_path, skills_csv=("\nreview,20000,8000,1,", "\nreview,20000,8000,4,"))
    assert [w for w in read_instance(target).warnings if "time_to_hire" in w] == [
        "skills.csv:2: time_to_hire: 4 periods for 'review' is the whole horizon (4 periods) or "
        "more: no hire of it can start"]
    assert not [w for w in read_instance(DATA / "tiny").warnings if "time_to_hire" in w]


def test_a_plan_folder_given_as_the_instance_is_said_to_be_one(tmp_path):
    # A planner's first run: `rebalance check` on a plan folder listed six "file is missing"
    # lines, never saying it was a plan folder.
    out = tmp_path / "plan"
    assert main(["plan", str(DATA / "tiny"), "-o", str(out), "-q"]) == 0
    with pytest.raises(InstanceError) as caught:
        read_instance(out)
    assert [str(p) for p in caught.value.problems] == [
        f"{out}: is a plan folder this tool wrote, not an instance; expected the instance "
        "folder it was made from (summary.json's instance_path)"]


def test_a_title_is_read_stripped_and_the_name_stays_the_folders(tmp_path):
    # Common practice: a report is headed with the words its author gives, and the folder
    # name stays the instance's name (summary.json and the CLI go by it).
    target = valid_copy(tmp_path)
    untitled = read_instance(target)
    assert (untitled.name, untitled.title, untitled.heading) == ("i", None, "i")
    settings = target / "settings.toml"
    text = settings.read_text()
    settings.write_text(text + '\n[report]\ntitle = "  Fenmarch permit review, 2027 "\n')
    instance = read_instance(target)
    assert instance.name == "i" and instance.title == "Fenmarch permit review, 2027"
    assert instance.heading == instance.title and not instance.warnings
    settings.write_text(text + "\n[report]\ntitle = 2027\n")  # a number is its text, as a year
    assert read_instance(target).title == "2027"


def test_every_bad_title_is_said_with_its_key_and_a_top_level_one_where_it_belongs(tmp_path):
    target = valid_copy(tmp_path)
    settings = target / "settings.toml"
    text = settings.read_text()
    expected = ("is not valid; expected one line of text of 1 to 120 characters, such as "
                '"Permit review staffing"')
    for given, shown in (('""', ""), ('"  "', "  "), ("20.5", "20.5"), ('"a\\nb"', "a\nb"),
                         (f'"{"x" * 121}"', "x" * 121), ("true", "true")):
        settings.write_text(text + f"\n[report]\ntitle = {given}\n")
        assert _problems(target) == [f"settings.toml: report.title: '{shown}' {expected}"]
    settings.write_text("report = 5\n" + text)
    assert _problems(target) == ["settings.toml: report: must be a table"]
    # Written above every section, as a top-level key: ignored, with where it belongs.
    settings.write_text('title = "Permit review"\n' + text)
    instance = read_instance(target)
    assert instance.title is None
    assert ("settings.toml: title: unknown section, ignored (expected one of: horizon, policy, "
            "move_costs, objective, solver, money, report) (did you mean 'title' under "
            "[report]?)") in instance.warnings


def test_a_mistyped_start_in_settings_toml_gets_no_spreadsheet_hint(tmp_path):
    # The hint that a spreadsheet turns 2027-01-01 into a date fits a workbook's cell, not a
    # settings.toml typo, nor a TOML date (TOML reads an unquoted 2027-01-01 as one), nor the
    # same date quoted, which TOML reads as text (TOML 1.0.0 spec, "Local Date" and "String").
    for i, start in enumerate(('"2027Q1"', "2027-01-01", '"2027-01-01"')):
        target = tmp_path / str(i)
        shutil.copytree(DATA / "tiny", target)
        settings = target / "settings.toml"
        lines = settings.read_text().splitlines()
        settings.write_text("\n".join(f"start = {start}" if line.startswith("start =") else line
                                      for line in lines) + "\n")
        [problem] = _problems(target)
        assert "is not a quarter" in problem and "spreadsheet" not in problem, problem


def _warnings_too(target: Path) -> list[str]:
    with pytest.raises(InstanceError) as caught:
        read_instance(target)
    return [str(p) for p in caught.value.problems]


def test_a_misspelt_required_setting_is_one_problem_naming_the_key_written(tmp_path):
    # "horizon.start: is missing" had come with no word of the strat beside it, the
    # suggestion only in a warning apart.  Which names are close is difflib's ratio (Python's
    # difflib documentation, get_close_matches); the rest is common practice.
    def variant(name: str, *edits: tuple[str, str]) -> Path:
        target = tmp_path / name
        shutil.copytree(DATA / "tiny", target)
        settings = target / "settings.toml"
        text = settings.read_text()
        for old, new in edits:
            text = text.replace(old, new)
        settings.write_text(text)
        return target

    assert _warnings_too(variant("start", ("start =", "strat ="))) == [
        'settings.toml: horizon.start: is missing; expected text such as "2027-Q1" '
        "(horizon.strat may be meant as it)"]
    assert _warnings_too(variant("both", ("start =", "strat ="), ("count =", "cuont ="))) == [
        'settings.toml: horizon: give either periods = [...] or start = "YYYY-Qn" with '
        "count = N (horizon.strat may be meant as start; horizon.cuont may be meant as count)"]
    # The hours are required when periods are generated; an optional key's typo is an error
    # of its own, saying the default it leaves in force (docs/instance-format.md's table).
    got = _warnings_too(variant("hours", ("hours_per_fte =", "hours_per_fet ="),
                                ("max_away_share =", "max_away_shares =")))
    assert got == [
        "settings.toml: policy.max_away_shares: unknown key; did you mean max_away_share? (as "
        "written, max_away_share stays at its default, 1.0: no cap)",
        "settings.toml: horizon.hours_per_fte: is missing; expected a number > 0 (required "
        "when periods are generated from start) (horizon.hours_per_fet may be meant as it)"]
    # Listed periods: a misspelt name or year in an entry, and a misspelt default of hours.
    listed = ('[[horizon.periods]]\nnmae = "2027-Q1"\nyear = "2027"\n\n'
              '[[horizon.periods]]\nname = "2027-Q2"\nyaer = "2027"\n\n[policy]')
    got = _warnings_too(variant("listed", ('start = "2027-Q1"\ncount = 4\n', ""),
                                ("hours_per_fte =", "hours_per_fet ="), ("[policy]", listed)))
    default = ("is missing and horizon.hours_per_fte gives no default; expected a number > 0 "
               "here or in horizon.hours_per_fte (horizon.hours_per_fet may be meant as "
               "horizon.hours_per_fte)")
    assert got == [
        "settings.toml: horizon.periods[1].name: is missing; expected the period's name, as "
        'text such as "FY27-P1" (horizon.periods[1].nmae may be meant as it)',
        f"settings.toml: horizon.periods[1].hours_per_fte: {default}",
        "settings.toml: horizon.periods[2].year: is missing; expected the budget year its "
        'spending falls in, as text such as "FY27" (horizon.periods[2].yaer may be meant as '
        "it)",
        f"settings.toml: horizon.periods[2].hours_per_fte: {default}"]
    # Nothing close: the missing key is said as before, the unknown key warned apart.
    assert _warnings_too(variant("far", ("start =", "opening ="))) == [
        'settings.toml: horizon.start: is missing; expected text such as "2027-Q1"',
        "settings.toml: horizon.opening: unknown key, ignored (expected one of: start, count, "
        "hours_per_fte, periods_per_year, periods)"]


def test_a_misspelt_optional_setting_is_an_error_saying_the_default_it_leaves(tmp_path):
    # A reviewer's check: policy.max_away_shar had read "valid" with a warning, the cap left
    # at 1.0 (no cap) for the plan.  Which names are close is difflib's ratio (Python's difflib
    # documentation, get_close_matches); each default's meaning is docs/instance-format.md's
    # settings table (max_away_share 1.0, relocation_cost 0).
    target = valid_copy(tmp_path)
    settings = target / "settings.toml"
    text = settings.read_text()
    settings.write_text(text.replace("max_away_share", "max_away_shar"))
    assert _problems(target) == [
        "settings.toml: policy.max_away_shar: unknown key; did you mean max_away_share? (as "
        "written, max_away_share stays at its default, 1.0: no cap)"]
    # The key it is close to given too: nothing is left at its default, so a warning.
    settings.write_text(text.replace("max_away_share = 0.5", "max_away_share = 0.5\n"
                                     "max_away_shar = 0.4"))
    assert any(w.startswith("settings.toml: policy.max_away_shar: unknown key, ignored")
               for w in read_instance(target).warnings)
    # A misspelt section leaves each of its keys at its default.
    settings.write_text(text.replace("[move_costs]", "[move_cost]"))
    assert _problems(target) == [
        f"settings.toml: move_cost.{key}: unknown key; did you mean move_costs.{key}? (as "
        f"written, move_costs.{key} stays at its default, 0: free where move_costs.csv gives "
        "no cost)" for key in ("detail_cost_per_period", "relocation_cost")]


def test_column_names_are_read_whatever_their_case_and_spaces(tmp_path):
    # A reviewer's check: a header typed "Office" drew "required column is missing" and an
    # "unknown column" warning for one word (common practice: headers match ignoring case).
    # Beside the column's own name, the other spelling stays an unknown column: which of the
    # two to read is the file's to say.
    target = valid_copy(tmp_path)
    offices = target / "offices.csv"
    text = offices.read_text()
    offices.write_text(text.replace("office,location", "Office , LOCATION", 1))
    instance = read_instance(target)
    assert [o.name for o in instance.offices] == ["A", "B"] and not instance.warnings
    offices.write_text(text.replace("office,location", "Office,office", 1))
    assert _warnings_too(target) == [
        "offices.csv:1: Office: is a column name 2 times (ignoring case); expected each "
        "column once",
        "offices.csv:1: location: required column is missing"]
    # A reviewer's check: two spellings of one optional column had been read as one of them
    # (Seats,seats: the other a warning) or, both unknown (Seats,SEATS), as no seats at all.
    for header in ("Seats,seats", "Seats,SEATS", " seats , seats"):
        offices.write_text(text.replace("seats", header, 1).replace(",1\n", ",1,1\n"))
        twice = "" if header == " seats , seats" else " (ignoring case)"
        assert _warnings_too(target) == [
            f"offices.csv:1: {header.split(',')[0].strip()}: is a column name 2 times{twice}; "
            "expected each column once"]


def test_what_a_misspelt_key_leaves_in_force_is_the_readers_own_default(tmp_path):
    # The error for a misspelt optional key says the default it leaves in force
    # (settings_reader.DEFAULT_MEANINGS); read here from an instance that sets none of them,
    # so the words cannot drift from the defaults the reader applies.
    from rebalance.settings_reader import DEFAULT_MEANINGS

    target = valid_copy(tmp_path)
    (target / "settings.toml").write_text(
        '[horizon]\nstart = "2027-Q1"\ncount = 4\nhours_per_fte = 480\n')
    read = read_instance(target)
    applied = {
        "policy.max_away_share": f"{read.policy.max_away_share:.1f}: no cap",
        "policy.max_consecutive_detail_periods": "none: no limit"
        if read.policy.max_consecutive_detail_periods is None else "",
        "objective.mode": f"{read.objective.mode}: least shortfall, then least cost",
        "objective.shortfall_cost": f"{read.objective.shortfall_cost:,.0f} a priority-weighted "
                                    "FTE-period short",
        "objective.shortfall_tolerance": f"{read.objective.shortfall_tolerance:g}".replace(
            "e-06", "e-6"),
        "solver.name": read.solver.name,
        "solver.time_limit_seconds": f"{read.solver.time_limit_seconds:g}",
        "solver.relative_gap": f"{read.solver.relative_gap:g}",
        "solver.threads": str(read.solver.threads), "solver.seed": str(read.solver.seed),
    }
    assert {k: DEFAULT_MEANINGS[k] for k in applied} == applied


def test_a_workbook_cells_date_in_a_listed_period_is_said_as_a_date() -> None:
    # A workbook's periods sheet hands a date cell to the settings reader as a CellDate (a
    # spreadsheet reads 2027-01-01 typed in a cell as a date: the openpyxl and LibreOffice
    # Calc documentation of cell types); the reader says what the cell holds and what to type.
    import datetime

    from rebalance.problems import Problem
    from rebalance.settings_reader import CellDate, read_periods

    day = CellDate(datetime.datetime(2027, 4, 1))
    listed = [{"name": day, "year": "2027", "hours_per_fte": 480},
              {"name": "2027-Q3", "year": day, "hours_per_fte": 480},
              {"name": "2027-Q4", "year": "2027", "hours_per_fte": day}]
    problems: list[Problem] = []
    periods, _ = read_periods({"horizon": {"periods": listed}}, problems)
    assert periods == ()
    hint = "(a spreadsheet reads 2027-01-01 typed in a cell as a date)"
    assert [(p.column, p.message) for p in problems] == [
        ("horizon.periods[1].name", "the cell holds a date (2027-04-01), not a period name; "
         f"type the period name as text, e.g. 2027-Q2 {hint}"),
        ("horizon.periods[2].year", "the cell holds a date (2027-04-01), not a budget year; "
         f"type the year's name as text, e.g. 2027 {hint}"),
        ("horizon.periods[3].hours_per_fte", "the cell holds a date (2027-04-01), which is "
         "not valid; expected a number > 0")]


def test_numbers_beyond_what_a_plan_can_take_are_out_of_range(tmp_path):
    # A reviewer's check: demand of 1e308 FTE passed check and ended plan in an internal
    # error (OverflowError), 1e20 in a solver failure, a salary of 1e308 in a nan objective,
    # and an hours_per_fte of 1e-300 made 480 hours such a demand.  The bounds are the
    # project's own (rebalance.read_limits); a value inside the old range keeps its words.
    from rebalance.read_limits import MAX_DEMAND_FTE, MAX_DEMAND_HOURS, MAX_NUMBER

    assert (MAX_NUMBER, MAX_DEMAND_FTE, MAX_DEMAND_HOURS) == (1e12, 1e6, 1e9)
    target = valid_copy(tmp_path)
    demand = target / "demand.csv"
    demand.write_text("office,skill,period,hours,priority\nA,review,2027-Q1,480,\n"
                      "A,review,2027-Q2,2e9,\nB,review,2027-Q3,-1,\n")
    settings = target / "settings.toml"
    text = settings.read_text()
    settings.write_text(text.replace("hours_per_fte = 480", "hours_per_fte = 1e-300"))
    assert _problems(target) == [
        "settings.toml: horizon.hours_per_fte: '1e-300' is not valid; expected a number from 1 "
        "to 10,000",
        "demand.csv:3: hours: '2e9' is out of range; expected a number from 0 to "
        "1,000,000,000",
        "demand.csv:4: hours: '-1' is out of range; expected a number >= 0"]
    # Hours in range may still make too many FTE: 1e9 hours at 1 hour per FTE.
    settings.write_text(text.replace("hours_per_fte = 480", "hours_per_fte = 1"))
    demand.write_text("office,skill,period,hours\nA,review,2027-Q1,1e9\nA,review,2027-Q2,1e6\n")
    assert _problems(target) == [
        "demand.csv:2: hours: '1e9' hours at 1 hours per FTE in 2027-Q1 are 1,000,000,000 FTE; "
        "expected at most 1,000,000 FTE"]
    # The settings: a listed period's hours, the solver's time limit; -3 keeps its words.
    settings.write_text(text.replace(
        'start = "2027-Q1"\ncount = 4\nhours_per_fte = 480',
        'hours_per_fte = -3\n[[horizon.periods]]\nname = "P1"\nyear = "2027"\n'
        'hours_per_fte = 20000').replace("relative_gap = 0",
                                         "relative_gap = 0\ntime_limit_seconds = 1e8"))
    said = [p for p in _problems(target) if p.startswith("settings.toml")]
    assert said == [
        "settings.toml: horizon.hours_per_fte: '-3' is not valid; expected a number > 0",
        "settings.toml: horizon.periods[1].hours_per_fte: '20,000' is not valid; expected a "
        "number from 1 to 10,000",
        "settings.toml: solver.time_limit_seconds: '100,000,000' is not valid; expected a "
        "number from 0.1 to 10,000,000"]


def test_settings_nested_thousands_deep_are_said_unreadable(tmp_path):
    # A reviewer's check: a = [[[[...]]]] 5,000 deep had ended check in "internal error:
    # RecursionError" (Python's tomllib parses nested arrays recursively).
    target = valid_copy(tmp_path)
    settings = target / "settings.toml"
    settings.write_text(settings.read_text() + "\n[deep]\na = " + "[" * 5000 + "]" * 5000 + "\n")
    assert _problems(target) == [
        "settings.toml: cannot be read: values nested too deeply; expected tables and lists "
        "a few deep"]


def test_a_folder_where_a_file_belongs_is_said_to_be_one(tmp_path):
    target = valid_copy(tmp_path)
    for name in ("staff.csv", "settings.toml"):
        (target / name).unlink()
        (target / name).mkdir()
    (target / "vacancies.csv").mkdir()
    assert _problems(target) == [
        "settings.toml: is a folder; expected a file", "staff.csv: is a folder; expected a file",
        "vacancies.csv: is a folder; expected a file"]


def test_blank_lines_above_the_header_are_skipped_and_rows_keep_their_lines(tmp_path):
    # A reviewer's check: they had made an empty header, and every row "more cells than the
    # header's 0 columns".  Rows are numbered as a spreadsheet shows them (the header on line
    # 3, the first row on line 4).
    target = valid_copy(tmp_path)
    offices = target / "offices.csv"
    offices.write_text("\n,,\n" + offices.read_text())
    assert [o.seats for o in read_instance(target).offices] == [10, 6]
    offices.write_text(offices.read_text().replace("A,Alder,10", "A,Alder,ten")
                       .replace("seats", "seat"))
    assert _problems(target) == [
        "offices.csv:3: seat: unknown column 'seat' (did you mean seats?); without a seats "
        "column every office's seats are unlimited"]
    offices.write_text(offices.read_text().replace("seat,", "seats,"))
    assert _problems(target) == [
        "offices.csv:4: seats: 'ten' is not a number; expected a whole number >= 0"]


def test_every_yes_no_word_the_message_lists_is_read():
    # The message lists the words accepted (a reviewer: it had said only "true or false").
    from rebalance.problems import Problem
    from rebalance.tables import FALSE_WORDS, TRUE_WORDS, YES_NO_WORDS, RawTable, TableRows

    listed = {w for pair in YES_NO_WORDS.split(", ") for w in pair.split("/")}
    assert listed | {"true", "false"} == TRUE_WORDS | FALSE_WORDS
    problems: list[Problem] = []
    rows = TableRows(RawTable("t.csv", ("a",), ()), problems, (("a",), ()))
    for word in sorted(TRUE_WORDS | FALSE_WORDS):
        assert rows.boolean({"a": word.upper()}, "a", False) == (word in TRUE_WORDS)
    assert problems == []


@pytest.mark.parametrize("text", ["1_0", "\u0666", "50%", "1,5", "0x10", " "])
def test_only_numbers_as_a_planner_writes_them_are_numbers(text):
    # Python's float() reads "1_0" as 10 and Arabic-Indic digits as digits (Python's
    # documentation of float and of numeric literals); a cell is read in ASCII digits only.
    from rebalance.tables import parse_number

    assert parse_number(text) is None
    assert parse_number(" 1e3 ") == 1000.0 and parse_number("-.5") == -0.5


def test_a_demand_header_with_neither_fte_nor_hours_is_one_problem(tmp_path):
    # A reviewer's check: it had been said on every row ("neither fte nor hours is given").
    target = valid_copy(tmp_path)
    demand = target / "demand.csv"
    demand.write_text(demand.read_text().replace(",fte,", ",amount,", 1))
    assert _problems(target) == [
        "demand.csv:1: fte: neither fte nor hours is a column; expected one of them, a value "
        "in each row"]


def test_a_count_of_rows_like_these_follows_its_examples():
    # A review: "(and 2 more rows like this)" came at the end of everything, after other
    # files' problems; it follows the ten examples it counts on from, for every reader
    # (demand building had moved it itself, by reading its own words back).
    from rebalance.problems import Problem
    from rebalance.tables import collapse_repeats

    same = [Problem("staff.csv", row, "fte", "'x' is not a number") for row in range(2, 14)]
    other = Problem("skills.csv", 2, "ramp", "'y' is not a number")
    said = [str(p) for p in collapse_repeats([*same, other])]
    assert said[10:] == ["staff.csv: fte: 'x' is not a number (and 2 more rows like this)",
                         "skills.csv:2: ramp: 'y' is not a number"]


def test_an_instance_given_as_dot_is_named_after_its_folder(monkeypatch):
    # A reviewer's run from inside the folder (`rebalance plan . -o ...`): the name was ""
    # in the console, summary.json and the page's title.  Path("tiny/.").name is "" and
    # Path("tiny/..").name is ".." (Python's pathlib documentation).
    monkeypatch.chdir(DATA / "tiny")
    assert read_instance(".").name == "tiny"
    monkeypatch.chdir(DATA / "tiny" / "..")
    assert read_instance("tiny/.").name == "tiny"
