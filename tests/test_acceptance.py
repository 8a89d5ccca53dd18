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
    assert "2 valid results, 3 required (C does not count); test further specimens" in v.reason
    assert roles(v)["C"] == "not counted"


def test_one_specimen_that_does_not_count_reads_does_not_and_two_read_do_not():
    one = verdict([t("A", 28.0), t("B", 29.0), t("C", 31.0, valid=False)])
    two = verdict([t("A", 28.0), t("C", 31.0, valid=False), t("D", 30.0, valid=False)])
    assert "(C does not count)" in one.reason and "do not count" not in one.reason
    assert "(C, D do not count)" in two.reason


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


def _retest_record(camp, source, name):
    """A record for a retest row: the data of ``source`` under its own header line, so
    its bytes (and SHA-256) are its own."""
    text = (camp / "records" / f"{source}.csv").read_text(encoding="utf-8")
    (camp / "records" / f"{name}.csv").write_text(text.replace(f"Specimen: {source}", f"Specimen: {name}", 1),
                                                  encoding="utf-8")
    return f"records/{name}.csv"


def test_retests_named_in_the_sheet_clear_a_low_result(tmp_path):
    # a stricter invented minimum (29.0) makes AL-02 (K_Ic 28.1) low; two retest rows carry
    # the load-displacement data of AL-01 and AL-03 (K_Ic 29.5 and 30.2) in records of their
    # own and name AL-02 in retest_of
    camp = _copy_sample(tmp_path)
    sheet = camp / "campaign.csv"
    with open(sheet, newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    fields = list(rows[0]) + ["retest_of"]
    by_id = {r["specimen"]: r for r in rows}
    rows += [dict(by_id["AL-01"], specimen="AL-02R1", retest_of="AL-02",
                  record=_retest_record(camp, "AL-01", "AL-02R1")),
             dict(by_id["AL-03"], specimen="AL-02R2", retest_of="AL-02",
                  record=_retest_record(camp, "AL-03", "AL-02R2"))]
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


# ---------------------------------------------------------------- review findings 8, 9 and duplicate records

OVERLAP_BY_MATERIAL = """
[specification]
name = "T-2"
[[requirement]]
material = "7075"
orientation = "L-T"
temperature_C = 21
min_K_Ic_MPa_sqrt_m = 26.0
min_valid = 3
[[requirement]]
material = "T7351"
orientation = "L-T"
temperature_C = 21
min_K_Ic_MPa_sqrt_m = 24.0
min_valid = 3
"""


def test_requirements_that_overlap_only_through_the_heats_material_leave_the_heat_not_assessed():
    # neither material text contains the other, so the file alone is accepted; a heat of
    # "7075-T7351 plate" is claimed by both, and must not be judged by whichever comes first
    s = parse_spec(OVERLAP_BY_MATERIAL, file="t2.toml")
    plate = "7075-T7351 aluminium plate"
    v = verdict([t(n, K, material=plate) for n, K in (("A", 28.0), ("B", 29.0), ("C", 30.0))], s)
    assert v.verdict == NOT_ASSESSED
    assert "requirement 1 (7075, L-T at 21 °C) and requirement 2 (T7351, L-T at 21 °C)" in v.reason
    assert "ambiguous" in v.reason and plate in v.reason
    assert set(roles(v).values()) == {"not assessed"}
    # a heat only one of them applies to is judged as usual
    other = verdict([t(n, K, material="7075-T651 plate") for n, K in (("A", 28.0), ("B", 29.0), ("C", 30.0))], s)
    assert other.verdict == ACCEPTED


def test_a_record_used_by_two_specimens_is_not_counted_twice_and_stops_the_assessment():
    same = "ab" * 32
    tests = [t("A", 28.0, record="r/A.csv", record_sha256=same), t("B", 29.0, record="r/B.csv", record_sha256="cd" * 32),
             t("C", 30.0, record="r/C.csv", record_sha256="ef" * 32),
             t("D", 28.0, record="r/D.csv", record_sha256=same)]  # the bytes of A's record again
    v = verdict(tests)
    assert v.verdict == NOT_ASSESSED
    assert roles(v)["D"] == "duplicate record" and roles(v)["A"] == "counted"
    assert "D's record r/D.csv has the same SHA-256 (abababababab…) as the record of A, r/A.csv" in v.reason
    (outcome,) = v.outcomes
    assert [s.specimen for s in outcome.specimens if s.role == "counted"] == ["A", "B", "C"]


def test_a_record_reused_in_another_heat_is_flagged_there_too():
    same = "ab" * 32
    v1, v2 = heat_verdicts([t("A", 28.0, record="r/A.csv", record_sha256=same),
                            t("X", 28.0, heat="H2", record="r/X.csv", record_sha256=same)], spec())
    assert roles(v2)["X"] == "duplicate record" and "as the record of A (heat H1), r/A.csv" in v2.reason
    assert "duplicate record" not in roles(v1).values()
    # the sheet naming the very same file twice says so plainly
    (v,) = heat_verdicts([t("A", 28.0, record="r/A.csv", record_sha256=same),
                          t("B", 29.0, record="r/A.csv", record_sha256=same)], spec())
    assert "B names the record of A, r/A.csv: one test cannot count as two specimens" in v.reason


def _undersized(name, K_Q, actual=24.8, yield_MPa=470.0):
    from reduce.acceptance import SizeShortfall
    from reduce.rules import size_required

    short = (SizeShortfall("ligament_size", actual, size_required(K_Q, yield_MPa, 2.5), K_Q),)
    return t(name, K_Q, valid=False, size_shortfalls=short)


def test_undersized_specimens_are_told_to_be_larger_not_to_test_more():
    # invented: K_Q 110-120 MPa·m^½ at σ_YS 470 MPa asks W − a ≥ 137-163 mm (ASTM E399 9.1.3,
    # 2.5 (K_Q/σ_YS)², from memory); these have 24.8 mm, so they qualify at most
    # 470 √(24.8/2500) = 46.8 MPa·m^½, below the minimum 90
    s = parse_spec(SPEC.format(extra="").replace("26.0", "90.0"), file="t1.toml")
    v = verdict([_undersized("A", 110.0), _undersized("B", 115.0), _undersized("C", 120.0)], s)
    assert v.verdict == RETEST
    assert "valid K_Ic cannot be obtained with specimens of this size" in v.reason
    assert "W − a ≥ 136.9–163.0 mm (these have 24.8 mm)" in v.reason
    assert "the largest K_Ic they could qualify (46.8 MPa·m^½) is below the minimum 90.0" in v.reason
    assert "test larger specimens (W − a ≥ 163 mm)" in v.reason and "elastic–plastic result" in v.reason
    assert "test further specimens" not in v.reason


def test_a_narrow_size_failure_still_asks_for_further_specimens():
    # required W − a only 10 % above the specimen's: not a wide margin
    s = parse_spec(SPEC.format(extra="").replace("26.0", "90.0"), file="t1.toml")
    narrow = _undersized("C", 100.0, actual=0.9 * 2.5 * (100.0 / 470.0) ** 2 * 1000)
    v = verdict([t("A", 95.0), t("B", 96.0), narrow], s)
    assert "test further specimens" in v.reason and "larger" not in v.reason


def test_the_demo_pressure_vessel_heat_is_told_its_specimens_are_too_small():
    tests = acceptance_inputs(reduce_sheet(SAMPLE / "campaign.csv"))
    v = next(v for v in heat_verdicts(tests, read_spec(SAMPLE / "spec_example.toml")) if v.heat == "H-PV33")
    assert v.verdict == RETEST and "valid K_Ic cannot be obtained with specimens of this size" in v.reason
    assert "test further specimens" not in v.reason


def test_accept_with_a_spec_typo_is_a_clear_error_not_a_traceback(tmp_path, capsys):
    camp = _copy_sample(tmp_path)
    bad = camp / "spec_example.toml"
    bad.write_text(bad.read_text().replace("min_valid = 3", "min_vaild = 3", 1))
    code = main(["accept", str(camp / "campaign.csv"), "--spec", str(bad), "--no-store"])
    err = capsys.readouterr().err
    assert code == 2 and "Traceback" not in err
    assert "spec_example.toml" in err and "key 'min_vaild': unknown key" in err
