"""Heat acceptance on small constructed heats, the specification reader, and
``cracktip accept`` on the demo campaign.

The heats, minima and retest rule here are invented for the tests; the retest
rule (one low result, two retests that must both pass) is common practice, no
source.
"""

import csv
import json
import shutil
from pathlib import Path

import pytest

from reduce.acceptance import (ACCEPTED, NOT_ASSESSED, REJECTED, RETEST, TestedSpecimen,
                               acceptance_inputs, heat_verdicts, without_heat)
from reduce.cli import main
from reduce.errors import SpecError
from reduce.pipeline import reduce_sheet
from reduce.spec import parse_spec, read_spec
from reduce.units import KSI_SQRT_IN_MPA_SQRT_M

SAMPLE = Path(__file__).resolve().parent.parent / "sample_data"

SPEC = """
[specification]
name = "T-1"
revision = "A"

[[requirement]]
orientation = "L-T"
temperature_C = 21
min_K_Ic_MPa_sqrt_m = 26.0
min_valid = 3
{extra}
"""
RETEST_RULE = """
  [requirement.retest]
  low_results = 1
  retests_each = 2
  source = "common practice, no source"
"""


def spec(extra=RETEST_RULE):
    return parse_spec(SPEC.format(extra=extra), file="t1.toml")


def t(name, K, heat="H1", valid=True, **kw):
    kw.setdefault("orientation", "L-T")
    kw.setdefault("temperature_C", 21.0)
    return TestedSpecimen(name, heat, K_Q=K, qualifies=valid,
                          reasons=() if valid else ("P_max/P_Q exceeds the limit",), **kw)


def verdict(tests, s=None):
    (v,) = heat_verdicts(tests, s or spec())
    return v


def roles(v):
    return {r.specimen: r.role for r in v.specimens}


def test_all_pass_is_accepted():
    v = verdict([t("A", 28.0), t("B", 29.1), t("C", 30.4)])
    assert v.verdict == ACCEPTED
    assert "3 valid results (3 required), lowest 28.0" in v.reason
    assert roles(v) == {"A": "counted", "B": "counted", "C": "counted"}


def test_exactly_the_minimum_passes():
    assert verdict([t("A", 26.0), t("B", 29.1), t("C", 30.4)]).verdict == ACCEPTED


def test_one_low_with_two_passing_retests_is_accepted():
    v = verdict([t("A", 28.0), t("B", 24.5), t("C", 30.4),
                 t("B-R1", 27.2, retest_of="B"), t("B-R2", 28.3, retest_of="B")])
    assert v.verdict == ACCEPTED
    assert roles(v)["B"] == "low, set aside"
    assert roles(v)["B-R1"] == roles(v)["B-R2"] == "retest passed"
    assert "cleared by passing retests B-R1, B-R2" in v.reason
    assert "common practice, no source" in v.reason


def test_one_low_with_a_failing_retest_is_rejected():
    v = verdict([t("A", 28.0), t("B", 24.5), t("C", 30.4),
                 t("B-R1", 27.2, retest_of="B"), t("B-R2", 25.9, retest_of="B")])
    assert v.verdict == REJECTED
    assert roles(v)["B-R2"] == "retest low"
    assert "every retest must pass" in v.reason


def test_one_low_with_retests_still_missing_needs_a_retest():
    v = verdict([t("A", 28.0), t("B", 24.5), t("C", 30.4), t("B-R1", 27.2, retest_of="B")])
    assert v.verdict == RETEST
    assert "2 passing retests required" in v.reason and "1 so far" in v.reason


def test_two_low_results_exceed_the_retest_rule():
    v = verdict([t("A", 28.0), t("B", 24.5), t("C", 25.0), t("D", 29.0)])
    assert v.verdict == REJECTED
    assert "allows retests for at most 1" in v.reason


def test_a_low_result_without_a_retest_rule_rejects():
    v = verdict([t("A", 28.0), t("B", 24.5), t("C", 30.0)], spec(extra=""))
    assert v.verdict == REJECTED
    assert "allows no retest" in v.reason


def test_too_few_valid_results_need_further_tests():
    v = verdict([t("A", 28.0), t("B", 29.0), t("C", 31.0, valid=False)])
    assert v.verdict == RETEST
    assert "2 valid results, 3 required (C do not count)" in v.reason
    assert roles(v)["C"] == "not counted"


def test_a_heat_carried_only_by_non_qualifying_K_Q_is_not_accepted():
    tests = [t("A", 112.0, valid=False), t("B", 118.0, valid=False), t("C", 108.0, valid=False)]
    v = verdict(tests)
    assert v.verdict == RETEST
    assert "0 valid results, 3 required" in v.reason
    assert all(r.role == "not counted" and "is not K_Ic" in r.note and "never counts K_Q" in r.note
               for r in v.specimens)


def test_K_Q_counts_only_where_the_specification_says_so_and_never_as_low():
    s = parse_spec(SPEC.format(extra='count_K_Q = "at_or_above_minimum"'))
    v = verdict([t("A", 28.0, valid=False), t("B", 29.0, valid=False), t("C", 30.0, valid=False)], s)
    assert v.verdict == ACCEPTED
    assert "including K_Q" in v.reason
    assert {r.kind for r in v.specimens} == {"K_Q"}
    # a non-qualifying K_Q below the minimum neither counts nor rejects
    v = verdict([t("A", 28.0), t("B", 29.0), t("C", 22.0, valid=False)], s)
    assert v.verdict == RETEST and roles(v)["C"] == "not counted"


def test_a_retest_of_a_result_that_was_not_low_counts_as_an_ordinary_result():
    v = verdict([t("A", 28.0), t("B", 29.0, valid=False), t("B2", 27.0, retest_of="B"), t("C", 30.0)])
    assert v.verdict == ACCEPTED
    assert roles(v)["B2"] == "counted"


def test_a_bad_retest_link_stops_the_assessment_and_names_the_cell():
    v = verdict([t("A", 28.0), t("B", 24.5), t("C", 30.4),
                 t("B-R1", 27.2, retest_of="X9", where="sheet.csv, row 5")])
    assert v.verdict == NOT_ASSESSED
    assert "sheet.csv, row 5, column 'retest_of', value 'X9'" in v.reason
    assert roles(v)["B-R1"] == "bad retest_of"


def test_a_retest_of_another_heat_is_refused():
    tests = [t("A", 28.0), t("B", 29.0), t("C", 30.0), t("Z", 27.0, heat="H2", retest_of="A")]
    v2 = heat_verdicts(tests, spec())[1]
    assert v2.heat == "H2" and v2.verdict == NOT_ASSESSED and "names a specimen of heat H1" in v2.reason


def test_a_specimen_not_reduced_stops_the_assessment():
    v = verdict([t("A", 28.0), t("B", 29.0), t("C", 30.0),
                 TestedSpecimen("D", "H1", error="record missing")])
    assert v.verdict == NOT_ASSESSED and "D could not be reduced" in v.reason


def test_specimens_outside_every_requirement_are_shown_but_not_counted():
    v = verdict([t("A", 28.0), t("B", 29.0), t("C", 30.0), t("D", 15.0, temperature_C=-40.0)])
    assert v.verdict == ACCEPTED and roles(v)["D"] == "not covered"


def test_a_heat_of_a_material_the_specification_does_not_cover_is_not_assessed():
    s = parse_spec(SPEC.format(extra='material = "7075"'))
    v = verdict([t("A", 28.0, material="4340 steel")], s)
    assert v.verdict == NOT_ASSESSED and "no requirement" in v.reason


def test_specimens_without_heat_are_set_apart():
    tests = [t("A", 28.0), t("B", 29.0, heat=None)]
    assert [v.heat for v in heat_verdicts(tests, spec())] == ["H1"]
    assert [x.specimen for x in without_heat(tests)] == ["B"]


# ---------------------------------------------------------------- the specification file

def test_units_of_the_specification_are_converted():
    s = parse_spec(SPEC.format(extra="").replace("min_K_Ic_MPa_sqrt_m = 26.0", "min_K_Ic_ksi_sqrt_in = 25")
                   .replace("temperature_C = 21", "temperature_F = 70"))
    r = s.requirements[0]
    assert r.min_K_Ic == pytest.approx(25 * KSI_SQRT_IN_MPA_SQRT_M)
    assert r.temperature_C == pytest.approx((70 - 32) / 1.8)


@pytest.mark.parametrize("change, message", [
    (("min_valid = 3", "min_vaild = 3"), "key 'min_vaild': unknown key"),
    (("min_valid = 3", "min_valid = 0"), "key 'min_valid', value 0: expected a whole number of at least 1"),
    (('orientation = "L-T"', 'orientation = "LT"'), "key 'orientation', value 'LT'"),
    (("min_K_Ic_MPa_sqrt_m = 26.0", "min_K_Ic_MPa_sqrt_m = -1"), "greater than zero"),
    (("min_valid = 3", 'min_valid = 3\ncount_K_Q = "sometimes"'), "value 'sometimes'"),
    (("temperature_C = 21", "temperature_C = 21\ntemperature_F = 70"), "give exactly one of"),
    (('name = "T-1"', 'name = "T-1'), "is not valid TOML"),
])
def test_specification_errors_name_the_file_the_key_and_the_value(change, message):
    with pytest.raises(SpecError, match="t1.toml") as err:
        parse_spec(SPEC.format(extra=RETEST_RULE).replace(*change), file="t1.toml")
    assert message in str(err.value)


def test_overlapping_requirements_are_refused():
    base = SPEC.format(extra="")
    second = base.split("[[requirement]]")[1].replace("temperature_C = 21", "temperature_C = 22")
    with pytest.raises(SpecError, match=r"requirement 2 .* overlaps requirement 1"):
        parse_spec(base + "[[requirement]]" + second, file="t1.toml")
    # 5 °C apart with the default 2 °C bands: two separate requirements
    apart = base.split("[[requirement]]")[1].replace("temperature_C = 21", "temperature_C = 26")
    assert len(parse_spec(base + "[[requirement]]" + apart).requirements) == 2


def test_a_retest_rule_must_say_where_it_comes_from():
    with pytest.raises(SpecError, match=r"\[retest\], key 'source': is required"):
        parse_spec(SPEC.format(extra=RETEST_RULE.replace('source = "common practice, no source"', "")))


def test_missing_specification_file_is_a_clear_error(tmp_path):
    with pytest.raises(SpecError, match="cannot be read"):
        read_spec(tmp_path / "none.toml")


def test_the_example_specification_reads():
    s = read_spec(SAMPLE / "spec_example.toml")
    assert s.citation == "CS-118 rev. C" and len(s.requirements) == 3
    assert all(r.retest is None or r.retest.source == "common practice, no source" for r in s.requirements)


# ---------------------------------------------------------------- through the sheet and the command

def _copy_sample(tmp_path):
    dest = tmp_path / "camp"
    shutil.copytree(SAMPLE, dest, ignore=shutil.ignore_patterns("*.db", "certificates", "*.py"))
    return dest


def test_accept_on_the_demo_campaign(tmp_path):
    camp = _copy_sample(tmp_path)
    code = main(["accept", str(camp / "campaign.csv"), "--spec", str(camp / "spec_example.toml"),
                 "--json", str(tmp_path / "v.json"), "--xlsx", str(tmp_path / "v.xlsx"), "--no-store"])
    assert code == 0
    data = json.loads((tmp_path / "v.json").read_text())
    got = {v["heat"]: v["verdict"] for v in data["verdicts"]}
    assert got == {"H-7A21": ACCEPTED, "H-4S08": RETEST, "H-PV33": RETEST}
    assert (tmp_path / "v.xlsx").stat().st_size > 0
    assert not (camp / "cracktip.db").exists()


def test_retests_named_in_the_sheet_clear_a_low_result(tmp_path):
    # a stricter invented minimum (29.0) makes AL-02 (K_Ic 28.1) low; two retest rows reuse
    # the records of AL-01 and AL-03 (K_Ic 29.5 and 30.2) and name AL-02 in retest_of
    camp = _copy_sample(tmp_path)
    sheet = camp / "campaign.csv"
    with open(sheet, newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    fields = list(rows[0]) + ["retest_of"]
    by_id = {r["specimen"]: r for r in rows}
    rows += [dict(by_id["AL-01"], specimen="AL-02R1", retest_of="AL-02"),
             dict(by_id["AL-03"], specimen="AL-02R2", retest_of="AL-02")]
    with open(sheet, "w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=fields, restval="")
        w.writeheader()
        w.writerows(rows)
    s = read_spec(camp / "spec_example.toml")
    strict = parse_spec(s.text.replace("min_K_Ic_MPa_sqrt_m = 26.0", "min_K_Ic_MPa_sqrt_m = 29.0"))
    tests = acceptance_inputs(reduce_sheet(sheet))
    v = next(v for v in heat_verdicts(tests, strict) if v.heat == "H-7A21")
    assert v.verdict == ACCEPTED, v.reason
    assert roles(v)["AL-02"] == "low, set aside"
    assert roles(v)["AL-02R1"] == roles(v)["AL-02R2"] == "retest passed"
