"""The handbook library as data: registry, lookup errors, inputs, limits, self-test calcs."""

from __future__ import annotations

import math
import tomllib

import pytest
from latex2mathml.converter import convert

from calcsheaf.calcfile.units import parse_quantity, to_si
from calcsheaf.errors import InputError
from calcsheaf.verification.handbook import CASES, get_case

REQUIRED_KEYS = {
    "sdof_viscous", "sdof_forced", "transmissibility_force", "transmissibility_base",
    "rotating_unbalance", "static_deflection", "pendulum_small", "pendulum_large",
    "physical_pendulum", "atwood_sheave", "rolling_incline", "two_mass_chain",
    "tuned_mass_absorber", "torsional_oscillator", "collar_rotating_arm",
    "conical_pendulum", "energy_per_cycle",
}
FAMILIES = {"free vibration", "forced vibration", "pendulums", "pulleys and rolling",
            "rotating systems", "multi-degree-of-freedom"}
CALC_TABLES = {"calc", "assumption", "reference", "parameters", "coordinates", "energy",
               "generalized_forces", "constraint", "initial", "analysis", "time_history",
               "frequency_response", "output", "result", "crosscheck"}


def test_registry_holds_every_required_case_sorted_by_key():
    assert REQUIRED_KEYS <= set(CASES)
    assert list(CASES) == sorted(CASES)
    assert {c.family for c in CASES.values()} == FAMILIES
    assert all(key == case.key for key, case in CASES.items())


def test_sdof_viscous_provides_the_fixed_names_from_m_k_c():
    case = get_case("sdof_viscous")
    assert dict(case.inputs) == {"m": "kg", "k": "N/m", "c": "N*s/m"}
    assert {"natural_frequency_hz", "damping_ratio", "damped_frequency_hz",
            "log_decrement"} <= set(case.evaluate({"m": 1.0, "k": 1.0, "c": 0.1}))


def test_unknown_key_suggests_the_nearest():
    with pytest.raises(InputError) as info:
        get_case("sdof_viscuos")
    err = info.value
    assert "unknown handbook case 'sdof_viscuos'" in err.problem
    assert "did you mean 'sdof_viscous'" in err.fix
    assert "two_mass_chain" in err.fix            # the full list of keys follows
    assert err.key == "crosscheck.case"


def test_unrelated_key_lists_cases_without_a_guess():
    with pytest.raises(InputError) as info:
        get_case("zzz")
    assert "did you mean" not in info.value.fix
    assert "Known cases: atwood_sheave" in info.value.fix


def test_missing_and_unknown_inputs_are_input_errors():
    case = get_case("sdof_viscous")
    with pytest.raises(InputError) as info:
        case.evaluate({"m": 1.0, "k": 4.0, "mass": 2.0})
    assert "missing c" in info.value.problem and "unknown mass" in info.value.problem
    assert "m [kg], k [N/m], c [N*s/m]" in info.value.fix


def test_validity_limits_report_text_and_verdict():
    small = get_case("pendulum_small")
    ok = small.check_limits({"L": 1.0, "g": 9.81, "theta0": 0.1})
    bad = small.check_limits({"L": 1.0, "g": 9.81, "theta0": 0.5})
    assert [holds for _, holds in ok] == [True, True]
    assert bad[0][1] is False and "small amplitude" in bad[0][0]
    conical = get_case("conical_pendulum")
    assert conical.check_limits({"L": 0.5, "Omega": 3.0, "g": 9.81})[0][1] is False
    rolling = get_case("rolling_incline")
    steep = {"m": 1.0, "r": 0.1, "I": 0.005, "alpha": 1.2, "g": 9.81, "mu_s": 0.3}
    assert rolling.check_limits(steep)[0] == ("no slip: tan(alpha) <= mu_s (1 + m r^2 / I)", False)


@pytest.mark.parametrize("key", sorted(CASES))
def test_case_record_is_complete(key):
    case = CASES[key]
    assert case.title and case.source and case.tolerance_reason
    assert 0 < case.tolerance < 0.1
    assert case.limits
    for name, quantity in case.provides.items():
        assert name == quantity.name
        assert quantity.unit
        assert "<math" in convert(quantity.formula)      # the report can typeset it


@pytest.mark.parametrize("key", sorted(CASES))
def test_selftest_calc_uses_design_keys_and_compares_every_quantity(key):
    case = CASES[key]
    calc = tomllib.loads(case.selftest_calc)
    assert set(calc) <= CALC_TABLES
    assert {"calc", "parameters", "coordinates", "energy", "crosscheck"} <= set(calc)
    assert calc["calc"]["number"].startswith("HB-")
    assert calc["reference"][0]["text"] == case.source
    compared = set()
    for row in calc["crosscheck"]:
        assert row["case"] == key
        assert set(row) <= {"case", "inputs", "compare", "tolerance"}
        assert not case.missing_inputs(row["inputs"]), row["inputs"]
        assert not case.unknown_inputs(row["inputs"]), row["inputs"]
        compared |= set(row["compare"])
    assert compared == {name for name, q in case.provides.items() if not q.design}


@pytest.mark.parametrize("key", sorted(CASES))
def test_evaluate_is_finite_at_the_selftest_numbers(key):
    case = CASES[key]
    calc = tomllib.loads(case.selftest_calc)
    params = {}
    for name, spec in calc["parameters"].items():
        text = spec if isinstance(spec, str) else spec["value"]
        params[name] = to_si(parse_quantity(text))
    row = calc["crosscheck"][0]
    inputs = {}
    for name, expr in row["inputs"].items():
        if expr in params:
            inputs[name] = params[expr]
    if len(inputs) < len(row["inputs"]):
        pytest.skip("an input is an expression, evaluated by the crosscheck machinery")
    values = case.evaluate(inputs)
    assert values and all(math.isfinite(v) for v in values.values())
    assert all(holds for _, holds in case.check_limits(inputs))


def test_docs_table_is_the_generated_one():
    from pathlib import Path

    from calcsheaf.verification.handbook.table import markdown

    docs = (Path(__file__).resolve().parents[1] / "docs" / "handbook.md").read_text()
    assert markdown(CASES) in docs, "regenerate docs/handbook.md from handbook.table.markdown"
    for key in CASES:
        assert f"### `{key}`" in docs
