"""Input contracts: text is never a path, output files never clobber inputs, ranges checked at load,
and error messages in the user's own units and words."""

import copy
from pathlib import Path

import pytest
from contract_helpers import SCENARIO, run

from estimator.errors import InputError

DATA = Path(__file__).parent / "data"
BASE = {
    "patient": {"weight": "70 kg"},
    "agent": {"name": "sevoflurane"},
    "phases": [{"duration": "10 min", "oxygen": "1 L/min", "vaporizer": "2 %"}],
}
CONCENTRATOR = '[[concentrators]]\nrated_flow = "5 L/min"\n'


def error_of(fn, *args, **kwargs) -> InputError:
    with pytest.raises(InputError) as exc:
        fn(*args, **kwargs)
    return exc.value


def scenario_error(mutate) -> InputError:
    from estimator.inputs.scenario import scenario_from_dict

    doc = copy.deepcopy(BASE)
    mutate(doc)
    return error_of(scenario_from_dict, doc)


# ------------------------------------------------------------------ item 1: text is never a path
def test_scenario_text_naming_a_file_is_not_read(tmp_path):
    from estimator.inputs.scenario import scenario_from_text

    secret = tmp_path / "secret.toml"
    secret.write_text('password = "TOPSECRET"\n')
    err = error_of(scenario_from_text, str(secret))
    assert "TOPSECRET" not in str(err) and err.field == "scenario"


def test_load_scenario_takes_a_path_and_refuses_text(tmp_path):
    from estimator.inputs.scenario import load_scenario, scenario_from_text

    f = tmp_path / "case.toml"
    f.write_text(SCENARIO)
    assert load_scenario(f).agent.name == load_scenario(str(f)).agent.name == "sevoflurane"
    assert scenario_from_text(SCENARIO).agent.name == "sevoflurane"
    err = error_of(load_scenario, SCENARIO)
    assert err.field == "scenario" and "scenario_from_text" in err.expected


@pytest.mark.parametrize(
    "module,loader,parser,text",
    [
        ("estimator.planning.supply", "load_inventory", "inventory_from_text", CONCENTRATOR),
        (
            "estimator.accounts.costs",
            "load_prices",
            "prices_from_text",
            '[prices]\ncurrency = "EUR"\nair_per_m3 = 2.0\n',
        ),
        (
            "estimator.planning.audit_policy",
            "load_policy",
            "policy_from_text",
            '[policy]\nfresh_gas_flow = "1 L/min"\n',
        ),
    ],
)
def test_every_contract_has_a_path_loader_and_a_text_parser(tmp_path, module, loader, parser, text):
    import importlib

    mod = importlib.import_module(module)
    f = tmp_path / "input.toml"
    f.write_text(text)
    assert getattr(mod, loader)(f) == getattr(mod, loader)(str(f))
    getattr(mod, parser)(text)
    assert error_of(getattr(mod, loader), text).field in ("inventory", "prices", "policy")
    secret = tmp_path / "secret.toml"
    secret.write_text('note = "TOPSECRET"\nx = [\n')
    assert "TOPSECRET" not in str(error_of(getattr(mod, parser), str(secret)))
    assert "TOPSECRET" not in str(error_of(getattr(mod, loader), secret))


@pytest.mark.parametrize("text", ['password = "TOPSECRET"\n[[concentrators]\n', "[a.TOPSECRET]\n[a.TOPSECRET]\n"])
def test_text_errors_never_quote_the_text(text):
    from estimator.planning.supply import inventory_from_text

    err = error_of(inventory_from_text, text)
    assert "TOPSECRET" not in str(err) and err.field == "inventory"


def test_simulate_refuses_a_path_naming_the_argument():
    import estimator

    err = error_of(estimator.simulate, "x.toml")
    assert err.field == "scenario" and "load_scenario" in err.expected
    err = error_of(estimator.simulate, Path("x.toml"))
    assert err.field == "scenario"


def test_simulate_takes_a_dict():
    import estimator

    assert estimator.simulate(copy.deepcopy(BASE)).totals["duration"].to("min").magnitude == pytest.approx(10)


def _inventory(tmp_path, scenario_name, scenario_text=SCENARIO):
    folder = tmp_path / "plans"
    folder.mkdir()
    (folder / scenario_name).write_text(scenario_text)
    inv = folder / "inventory.toml"
    inv.write_text(
        f'[[cylinders]]\ngas = "oxygen"\nwater_capacity = "10 L"\npressure = "137 bar"\ncount = 2\n'
        f'[[demand.cases]]\nscenario = "{scenario_name}"\nper_day = 2\n'
    )
    return inv


def test_named_scenario_resolves_beside_the_inventory(tmp_path, monkeypatch):
    from estimator.planning.supply import load_inventory, plan_supply

    inv = _inventory(tmp_path, "case.toml")
    monkeypatch.chdir(tmp_path)  # a different folder from the inventory's
    report = plan_supply(load_inventory(inv), start="2026-03-02")
    assert report.items


def test_named_scenario_error_carries_its_place_in_the_inventory(tmp_path):
    from estimator.planning.supply import load_inventory, plan_supply

    inv = _inventory(tmp_path, "case.toml", SCENARIO.replace('oxygen = "1 L/min"', 'oxygen = "6 L"'))
    err = error_of(plan_supply, load_inventory(inv), start="2026-03-02")
    assert err.field == "demand.cases[0].scenario.phases[0].oxygen"


@pytest.mark.parametrize("name", ["case.txt", "passwd"])
def test_named_scenario_must_be_a_toml_file(tmp_path, name):
    from estimator.planning.supply import load_inventory, plan_supply

    inv = _inventory(tmp_path, name, 'root = "x:0:0:TOPSECRET"\n')
    err = error_of(plan_supply, load_inventory(inv), start="2026-03-02")
    assert err.field == "demand.cases[0].scenario" and ".toml" in err.expected
    assert "TOPSECRET" not in str(err)


def test_a_named_toml_file_that_is_no_scenario_is_not_echoed(tmp_path):
    from estimator.planning.supply import load_inventory, plan_supply

    secret = 'token = "TOPSECRET"\n[patient]\nweight = "70 kg"\npassword = "TOPSECRET"\n'
    inv = _inventory(tmp_path, "settings.toml", secret)
    err = error_of(plan_supply, load_inventory(inv), start="2026-03-02")
    assert err.field.startswith("demand.cases[0].scenario") and "TOPSECRET" not in str(err)


def test_case_and_supply_treat_a_non_toml_scenario_alike(tmp_path, capsys):
    f = tmp_path / "case.txt"
    f.write_text(SCENARIO)
    code, _, err = run(capsys, "case", str(f))
    assert code == 2 and ".toml" in err
    inv = _inventory(tmp_path, "case.txt")
    code, _, err = run(capsys, "supply", str(inv), "--start", "2026-03-02")
    assert code == 2 and ".toml" in err and "demand.cases[0].scenario" in err


# ------------------------------------------------------------------ item 9: ranges at load
@pytest.mark.parametrize("price", [1e308, -1.0, True, "5"])
def test_prices_have_a_practical_range(price):
    from estimator.accounts.costs import parse_prices

    err = error_of(parse_prices, {"currency": "EUR", "oxygen_per_m3": price})
    assert err.field == "prices.oxygen_per_m3"


@pytest.mark.parametrize(
    "data,field",
    [
        ({"agent_bottle": 100, "bottle_volume": "banana"}, "prices.bottle_volume"),
        ({"cylinders": {"oxygen": {"price": 10, "contents": "1e12 L"}}}, "prices.cylinders.oxygen.contents"),
    ],
)
def test_price_quantities_are_checked_by_the_model(data, field):
    from estimator.accounts.costs import PricesInput, parse_prices
    from estimator.fields import quantity_spec

    assert error_of(parse_prices, data).field == field
    assert quantity_spec(PricesInput, "bottle_volume").unit == "mL"


def test_a_large_price_in_a_many_digit_currency_is_accepted():
    from estimator.accounts.costs import parse_prices

    assert parse_prices({"agent_bottle": 5_000_000, "bottle_volume": "250 mL"}).agent_per_ml == 20_000


@pytest.mark.parametrize(
    "text,field",
    [
        ('[[cylinders]]\ngas = "oxygen"\ncount = 1000000000000\n', "cylinders[0].count"),
        ('[[bottles]]\nagent = "sevoflurane"\ncount = 20000\n', "bottles[0].count"),
        (CONCENTRATOR + 'start = "08:60"\n', "concentrators[0].start"),
        (CONCENTRATOR + 'start = "24:00"\n', "concentrators[0].start"),
        ('[[concentrators]]\nrated_flow = "banana"\n', "concentrators[0].rated_flow"),
        ('[[concentrators]]\nrated_flow = "5 kg"\n', "concentrators[0].rated_flow"),
        ('[[cylinders]]\ngas = "oxygen"\npressure = "1e300 bar"\n', "cylinders[0].pressure"),
        ('[demand]\nday_start = "7:75"\n', "demand.day_start"),
        ('[plan]\nlead_time = "1e9 day"\n', "plan.lead_time"),
        ('[absorbent]\nstock = "banana"\n', "absorbent.stock"),
        ('[site]\nelevation = "20 km"\n', "site.elevation"),
        ("[plan]\nstart = 70\n", "plan.start"),
        (CONCENTRATOR + "purity = 93\n", "concentrators[0].purity"),
        (CONCENTRATOR + 'purity = [["0 L/min", "x"], ["5 L/min", "90 %"]]\n', "concentrators[0].purity[0][1]"),
    ],
)
def test_inventory_values_are_checked_at_load(text, field):
    from estimator.planning.supply import inventory_from_text

    assert error_of(inventory_from_text, text).field == field


def test_a_json_quantity_is_accepted_in_an_inventory():
    from estimator.planning.supply import inventory_from_text

    inv = inventory_from_text('[[concentrators]]\nrated_flow = { magnitude = 5, units = "L/min" }\n')
    assert inv.concentrators[0].rated_flow == {"magnitude": 5, "units": "L/min"}


def test_concentrator_start_accepts_a_proper_clock_time():
    from estimator.planning.supply import inventory_from_text

    assert inventory_from_text(CONCENTRATOR + 'start = "23:59"\n').concentrators[0].start == "23:59"


def test_flow_floor_scale_bands_must_rise():
    err = scenario_error(
        lambda d: d.update(
            flow_floor={"scale": [{"up_to": "5 L/min", "step": "0.5 L/min"}, {"up_to": "1 L/min", "step": "0.1 L/min"}]}
        )
    )
    assert err.field == "flow_floor.scale[1].up_to"


def test_policy_max_cases_has_a_range():
    from estimator.planning.audit_policy import parse_policy

    assert error_of(parse_policy, {"max_cases": 10**12}).field == "policy.max_cases"
    assert error_of(parse_policy, {"fresh_gas_flow": "banana"}).field == "policy.fresh_gas_flow"


def test_quantity_fields_carry_unit_range_and_description():
    from estimator.fields import quantity_spec, quantity_specs
    from estimator.inputs.inventory_file import ConcentratorEntry
    from estimator.inputs.scenario import PatientInput, PhaseInput

    age = quantity_specs(PatientInput)["age"]
    assert (age.unit, age.low, age.high) == ("year", 0.0, 120.0)
    assert quantity_spec(PhaseInput, "oxygen").description == "flowmeter flow"
    assert quantity_spec(ConcentratorEntry, "rated_flow").high == 100.0


# ------------------------------------------------------------------ item 10: messages
def test_years_are_written_years():
    err = scenario_error(lambda d: d["patient"].update(age="130 years"))
    assert "0 to 120 years" in err.expected and " a " not in err.expected + " "


def test_range_is_given_in_the_unit_typed():
    err = scenario_error(
        lambda d: d["phases"][0].update(oxygen_fraction="20 %", total_flow="1 L/min") or d["phases"][0].pop("oxygen")
    )
    assert "21 to 100 %" in err.expected


def test_bare_number_above_one_for_a_fraction_is_refused_with_both_readings(capsys):
    code, _, err = run(capsys, "mac", "--agent", "sevoflurane", "--age", "40", "--nitrous-oxide", "70")
    assert code == 2 and "--nitrous-oxide" in err and "70 %" in err and "0.7" in err
    code, out, _ = run(capsys, "mac", "--agent", "sevoflurane", "--age", "40", "--nitrous-oxide", "0.7")
    assert code == 0 and "70 %" in out


def test_bare_fraction_in_a_file_gets_the_same_rule():
    err = scenario_error(lambda d: d["phases"][0].update(vaporizer=30))
    assert err.field == "phases[0].vaporizer" and "30 %" in err.expected


def test_gauge_marker_on_a_partial_pressure_is_explained():
    err = scenario_error(lambda d: d["patient"].update(target_paco2="0 bar(g)"))
    assert "[mass]" not in str(err) and "gauge" in err.expected


@pytest.mark.parametrize("text", ["0{", "1 (", "2 L/(min", "3 ]"])
def test_odd_unit_text_is_an_input_error(text):
    assert scenario_error(lambda d: d["patient"].update(weight=text)).field == "patient.weight"


@pytest.mark.parametrize(
    "weight",
    [{"magnitude": 70, "units": "kg("}, {"magnitude": "x", "units": "kg"}, {"magnitude": [1, 2], "units": "kg"}],
)
def test_odd_json_quantities_are_input_errors(weight):
    err = scenario_error(lambda d: d["patient"].update(weight=weight))
    assert err.field == "patient.weight" and "could not convert" not in err.expected


def test_unknown_unit_kind_is_said_in_words():
    err = scenario_error(lambda d: d["phases"][0].update(oxygen="2 kg**2/m"))
    assert "[mass]" not in str(err) and err.field == "phases[0].oxygen"


def test_pydantic_wording_does_not_leak():
    err = scenario_error(lambda d: d.update(phases={"duration": "1 min"}))
    assert "Input should be" not in str(err) and "list" in err.expected


def test_misspelt_value_shown_once():
    err = scenario_error(lambda d: d["agent"].update(name="sevo"))
    assert str(err).count("'sevo'") == 1


def test_vaporizer_beyond_the_agent_maximum_names_the_phase():
    def mutate(d):
        d["phases"].append({"duration": "10 min", "oxygen": "1 L/min", "vaporizer": "10 %"})

    err = scenario_error(mutate)
    assert err.field == "phases[1].vaporizer" and "8 %" in err.expected


@pytest.mark.parametrize(
    "fn,arg,field",
    [
        ("estimator.inputs.scenario:scenario_from_dict", {**BASE, "colour": 1}, "colour"),
        ("estimator.accounts.costs:parse_prices", {"colour": 1}, "prices.colour"),
        ("estimator.planning.audit_policy:parse_policy", {"colour": 1}, "policy.colour"),
    ],
)
def test_one_wording_for_unknown_keys(fn, arg, field):
    import importlib

    module, name = fn.split(":")
    err = error_of(getattr(importlib.import_module(module), name), arg)
    assert err.field == field and err.expected.startswith("a key valid here")


def test_inventory_unknown_key_uses_the_same_wording():
    from estimator.planning.supply import inventory_from_text

    err = error_of(inventory_from_text, "[[bottles]]\nagent = 'sevoflurane'\ncont = 3\n")
    assert err.field == "bottles[0].cont" and err.expected.startswith("a key valid here")
