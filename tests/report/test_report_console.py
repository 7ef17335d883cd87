"""Console summary: what a stage stopped early leaves open, in the stage's own units."""

from __future__ import annotations

from rebalance.report.console import room_left
from rebalance.solve import StageResult, Status


def stage(name: str, status: Status, objective: float, bound: float, gap: float) -> StageResult:
    return StageResult(name, status, objective, bound, gap, 10.0, "Time limit reached")


def test_a_cost_stage_stopped_early_says_how_much_cheaper_a_plan_might_be():
    text = room_left(stage("cost", Status.FEASIBLE_WITH_GAP, 2_461_000.0, 2_410_000.0,
                            51_000 / 2_461_000))
    assert text == "a plan with the same shortfall may cost up to 51,000 less (gap 2.07%)"


def test_a_shortfall_stage_stopped_early_says_how_much_less_short_a_plan_might_be():
    text = room_left(stage("shortfall", Status.FEASIBLE_WITH_GAP, 1808.47, 1528.95,
                            279.52 / 1808.47))
    assert text is not None and "up to 279.520 weighted FTE-periods less shortfall" in text


def test_a_proven_stage_leaves_nothing_open():
    assert room_left(stage("cost", Status.OPTIMAL, 43_000.0, 43_000.0, 0.0)) is None


def test_a_stage_bounded_only_by_zero_says_it_had_no_time_to_bound_rather_than_all_may_go():
    # A sweep of generated instances: 50 small offices at 15 s left the cost stage 2 s.
    text = room_left(stage("cost", Status.FEASIBLE_WITH_GAP, 6_945_700.0, 0.0, 1.0))
    assert text == "no bound worked out in the 10.00s this stage had, beyond 0 (gap 100.00%)"


def test_a_stage_optimal_within_the_gap_asked_says_what_is_left():
    # A sweep read "optimal" beside a bound 0.53% below: optimal as asked, not exactly.
    from dataclasses import replace

    from conftest import DATA, solve_verified

    from rebalance import read_instance
    from rebalance.report.console import format_summary

    result = solve_verified(read_instance(DATA / "tiny"))
    first = replace(result.solve.stages[0], objective=165.945, bound=165.061,
                    gap=0.884 / 165.945)
    text = format_summary(replace(result, solve=replace(result.solve,
                                                        stages=(first, *result.solve.stages[1:]))))
    assert "stage shortfall: optimal within the gap asked (0.53% left), objective 165.945" in text
    assert "stage cost: optimal, objective 43,000" in text  # exact: no words added


def _tiny_result():
    from conftest import DATA, solve_verified

    from rebalance import read_instance

    return solve_verified(read_instance(DATA / "tiny"))


def test_the_summary_lists_problems_as_verify_does(tmp_path):
    # The summary had listed the first 20 violations one a line: a moved work row read as
    # several problems, and the cut fell anywhere.  Now its list is verify's, indented.
    import shutil
    from dataclasses import replace

    from conftest import DATA
    from report_cases import tiny_plan_folder

    from rebalance import read_instance
    from rebalance.report.console import format_summary, format_violations
    from rebalance.verify import verify_folder

    folder = tmp_path / "moved"
    shutil.copytree(tiny_plan_folder(), folder)
    work = (folder / "work.csv").read_text().splitlines()
    person, period, office, *rest = work[1].split(",")
    work[1] = ",".join([person, period, {"A": "B", "B": "A"}[office], *rest])
    (folder / "work.csv").write_text("\n".join(work) + "\n")
    violations = tuple(verify_folder(read_instance(DATA / "tiny"), folder))
    _, *said = format_violations(violations).splitlines()
    assert any(line.startswith("      so ") for line in said)
    text = format_summary(replace(_tiny_result(), violations=violations)).splitlines()
    problems = sum(line.startswith("  - ") for line in said)
    at = text.index("  independent verification: FAILED "
                    f"({problems} problem{'' if problems == 1 else 's'})")
    assert text[at + 1:at + 1 + len(said)] == ["  " + line for line in said]
    assert text[at + 1 + len(said)] == ""  # nothing cut, nothing counted


def _one_cause_and(figures: int) -> tuple:
    """A hire-cost violation with five knock-on coverage lines, then ``figures`` summary
    figures each a problem of its own."""
    from rebalance.verify import Violation

    cause = Violation("hire_costs", "1 review at B from 2027-Q4", "onboarding cost differs",
                      file="hires.csv:2")
    rows = [Violation("coverage_hire_output", f"review at B in 2027-Q{q}", "hire_output_fte off",
                      file=f"coverage.csv:{q}", follows=cause) for q in range(1, 6)]
    others = [Violation("summary", f"figure {i}", "says 1; recomputed 2", file="summary.json")
              for i in range(figures)]
    return (cause, *rows, *others)


def test_the_summary_shows_the_first_20_problems_and_counts_the_rest():
    # Past the cap in lines, each problem keeps its first 3 knock-on lines, as verify's list
    # does (both cut by rebalance.verify_causes.first_problems).
    from dataclasses import replace

    from rebalance.report.console import KNOCK_ONS_SHOWN, PROBLEMS_SHOWN, format_summary

    text = format_summary(replace(_tiny_result(), violations=_one_cause_and(PROBLEMS_SHOWN + 4)))
    lines = text.splitlines()
    at = lines.index(f"  independent verification: FAILED ({PROBLEMS_SHOWN + 5} problems)")
    listed = lines[at + 1:lines.index("", at)]
    assert listed[0] == "    - hires.csv:2: 1 review at B from 2027-Q4: onboarding cost differs"
    assert listed[1:1 + KNOCK_ONS_SHOWN] == [
        f"        so coverage.csv:{q}: review at B in 2027-Q{q}: hire_output_fte off"
        for q in range(1, 1 + KNOCK_ONS_SHOWN)]
    assert listed[1 + KNOCK_ONS_SHOWN] == f"        ... and {5 - KNOCK_ONS_SHOWN} more under it"
    assert sum(line.startswith("    - ") for line in listed) == PROBLEMS_SHOWN
    assert listed[-1] == "    ... and 5 more; rebalance verify with --all lists every one"


def test_knock_ons_cut_under_the_cap_say_how_to_see_them_all():
    # Fewer problems than the cap, but one's knock-on lines cut: the last "more under it"
    # line says how to list them all, as verify's own list does (it had said nothing).
    from dataclasses import replace

    from rebalance.report.console import KNOCK_ONS_SHOWN, format_summary

    # 21 lines, 16 problems: cut in lines, not in problems.
    lines = format_summary(replace(_tiny_result(), violations=_one_cause_and(15))).splitlines()
    assert (f"        ... and {5 - KNOCK_ONS_SHOWN} more under it; rebalance verify with --all "
            "lists every one") in lines


def test_a_replans_verdict_counts_problems_as_the_summary_does():
    # format_outcome (a re-plan's console) had counted violations: one edited hire row with
    # its five knock-on coverage rows read "FAILED (6 problems)".
    from dataclasses import replace

    from rebalance.report.console import format_outcome
    from rebalance.verify import Violation

    cause = Violation("hire_costs", "1 review at B from 2027-Q4", "onboarding cost differs",
                      file="hires.csv:2")
    rows = [Violation("coverage_hire_output", f"review at B in 2027-Q{q}", "hire_output_fte off",
                      file=f"coverage.csv:{q}", follows=cause) for q in range(1, 6)]
    text = format_outcome(replace(_tiny_result(), violations=(cause, *rows)), replan=True)
    assert "independent verification: FAILED (1 problem)" in text, text


def test_the_head_line_agrees_with_its_counts_of_figures_and_problems():
    # A reviewer read "1 figure in 1 coverage.csv row differ because of them": English
    # agreement (common practice) of the verb with its count ("1 figure differs", "2 figures
    # differ") and of the pronoun with the problems the figures follow from.
    from rebalance.report.console import format_violations
    from rebalance.verify import Violation

    def work(line: int, person: str) -> Violation:
        return Violation("work_location", f"person {person} in 2027-Q1", "works at B but is at A",
                         file=f"work.csv:{line}")

    a1, a2, a3 = work(2, "a1"), work(3, "a2"), work(4, "a3")
    one = Violation("coverage_staff_output", "review at B in 2027-Q1", "staff_output_fte off",
                    file="coverage.csv:7", follows=a1)
    head = format_violations([a1, a2, one]).splitlines()[0]
    assert head == ("verification failed: 2 problems; 1 figure in 1 coverage.csv row differs "
                    "because of one of them and is shown under it")
    # Both problems behind it, and two figures: "them", "the first problem each follows from".
    both = Violation("coverage_staff_output", "review at A in 2027-Q1", "staff_output_fte off",
                     file="coverage.csv:2", follows=a1, also_follows=(a2,))
    head = format_violations([a1, a2, one, both]).splitlines()[0]
    assert head == ("verification failed: 2 problems; 2 figures in 2 coverage.csv rows differ "
                    "because of them and are shown under the first problem each follows from")
    # Two of three problems behind one figure: "some of them", "it".
    head = format_violations([a1, a2, a3, both]).splitlines()[0]
    assert head == ("verification failed: 3 problems; 1 figure in 1 coverage.csv row differs "
                    "because of some of them and is shown under the first problem it follows "
                    "from")


def test_the_grouped_lines_read_person_column_and_period_from_fields_not_text():
    # The rule itself (no outside source): a reworded where or message must not change what
    # the grouped lines name; each Violation here says one thing in its text, another in its
    # fields, and the fields win.
    from rebalance.report.console import format_violations
    from rebalance.verify import Violation

    def moved(line: int, person: str) -> Violation:
        return Violation("work_location", f"row of {person.upper()}", "works at B but is at A",
                         file=f"plans/x/work.csv:{line}", table="work", line=line,
                         person=person, period="2027-Q1")

    a1, b1 = moved(2, "a1"), moved(9, "b1")
    hire = Violation("hire_cost", "person z9 hired", "count 2 disagrees",
                     file="elsewhere.csv", table="hires", line=2)
    figures = [Violation("coverage_staff_output", "review at A in 2027-Q1", f"{word} changed",
                         file="coverage.csv:2", follows=a1, also_follows=(b1, hire),
                         table="coverage", line=2, period="2027-Q1", figure_column=column)
               for word, column in (("output", "staff_output_fte"), ("cover", "covered_fte"))]
    seats = [Violation("seats", f"B, period {t}", "8 seats used; 6 exist", file="hires.csv",
                       at=("B", t), table="hires", period=f"2027-Q{t + 1}") for t in (1, 2, 3)]
    lines = format_violations([a1, b1, hire, *figures, *seats]).splitlines()
    assert lines[2] == ("      so coverage.csv:2: review at A in 2027-Q1: output changed, and "
                        "covered_fte with it (it also follows from b1 and hires.csv:2)")
    assert lines[-1].startswith("  - hires.csv: B, period 1 to 2027-Q4 (3 periods): 8 seats")
