"""Cost accounting checked against Dion's published vapour-cost formula, published prices and the
arithmetic of the trade (per bottle, per m3, per cylinder)."""

import pandas as pd
import pytest

from estimator.accounts.costs import (
    DEMO_PRICES,
    case_cost,
    compare_costs,
    cost_table,
    load_prices,
    parse_prices,
    period_cost,
)
from estimator.errors import InputError
from estimator.units import Q_


def test_dion_1992_worked_cost():
    # Dion P, Can J Anaesth 1992;39:633: liquid mL = C% x FGF x t x MW / (2412 x density).
    # 2 % sevoflurane, 1 L/min, 60 min: 2 x 1 x 60 x 200.05 / (2412 x 1.52) = 6.548 mL.
    # Price $0.34/mL (ASA 2018 abstract A4236, one US institution) -> $2.226.
    liquid = 2 * 1 * 60 * 200.05 / (2412 * 1.52)
    prices = parse_prices({"currency": "USD", "agent_per_ml": 0.34})
    cost = case_cost({"agent_liquid": Q_(liquid, "mL")}, prices, "sevoflurane")
    assert cost["agent"] == pytest.approx(6.548 * 0.34, rel=1e-3)  # 4 significant figures of the hand value
    assert cost["currency"] == "USD" and cost["total"] == cost["agent"]


def test_bottle_price_is_price_over_volume():
    # Common practice, no source: price per mL = bottle price / bottle volume.
    p = parse_prices({"currency": "EUR", "agent_bottle": 150.0, "bottle_volume": "250 mL"})
    assert p.agent_price("desflurane") == pytest.approx(0.6)
    p2 = parse_prices({"currency": "EUR", "agents": {"isoflurane": {"agent_bottle": 25.0, "bottle_volume": "0.1 L"}}})
    assert p2.agent_price("isoflurane") == pytest.approx(0.25)
    assert p2.agent_price("sevoflurane") is None


def test_nitrous_oxide_per_m3_uk_audit_price():
    # N2O about 26 GBP/m3 (a UK audit abstract quoted in a secondary source; primary not identified): 1000 L -> 26 GBP.
    p = parse_prices({"currency": "GBP", "nitrous_oxide_per_m3": 26.0})
    c = case_cost({"nitrous_oxide": Q_(1000, "L")}, p)
    assert c["gases"] == pytest.approx(26.0) and c["gas_detail"]["nitrous_oxide"] == pytest.approx(26.0)


def test_cylinder_price_per_litre_of_contents():
    # A cylinder priced whole: price per litre = price / free-gas contents (common practice).
    p = parse_prices({"currency": "site units", "cylinders": {"oxygen": {"price": 17.0, "contents": "680 L"}}})
    assert p.gas_per_litre["oxygen"] == pytest.approx(17.0 / 680.0)
    assert case_cost({"oxygen": Q_(340, "L")}, p)["gases"] == pytest.approx(8.5)


def test_absorbent_per_kg():
    p = parse_prices({"currency": "EUR", "absorbent_per_kg": 8.0})
    assert case_cost({"absorbent": Q_(500, "g")}, p)["absorbent"] == pytest.approx(4.0)


@pytest.mark.parametrize(
    "data,field",
    [
        ({"currency": "EUR", "oxygen_per_m4": 1.0}, "prices.oxygen_per_m4"),
        ({"currency": "EUR", "air_per_m3": -1.0}, "prices.air_per_m3"),
        ({"currency": "EUR", "agent_bottle": 100.0}, "prices.bottle_volume"),
        (
            {"currency": "EUR", "agent_bottle": 100.0, "bottle_volume": "250 mL", "agent_per_ml": 0.3},
            "prices.agent_per_ml",
        ),
        ({"currency": "EUR", "agents": {"ether": {"agent_per_ml": 0.1}}}, "prices.agents"),
        ({"currency": "EUR", "bottle_volume": "250 mL", "agent_bottle": 10.0, "cylinders": {}}, None),
        ({"currency": "", "air_per_m3": 1.0}, "prices.currency"),
        ({"currency": "EUR", "agent_per_ml": "cheap"}, "prices.agent_per_ml"),
    ],
)
def test_bad_prices_name_the_field(data, field):
    if field is None:
        parse_prices(data)  # a valid table
        return
    with pytest.raises(InputError) as err:
        parse_prices(data)
    assert str(err.value).startswith(field)


def test_unpriced_items_are_listed_never_silently_zero():
    p = parse_prices({"currency": "EUR", "oxygen_per_m3": 5.0})
    c = case_cost({"agent_liquid": Q_(10, "mL"), "oxygen": Q_(100, "L"), "air": Q_(50, "L")}, p, "sevoflurane")
    assert set(c["unpriced"]) == {"agent", "air"}
    assert c["total"] == pytest.approx(0.5)


def test_period_sum_and_one_currency():
    a = {"currency": "EUR", "agent": 1.0, "gases": 2.0, "absorbent": 0.5, "total": 3.5}
    b = {"currency": "EUR", "agent": 2.0, "gases": 1.0, "absorbent": 0.0, "total": 3.0}
    total = period_cost([a, b])
    assert total["total"] == pytest.approx(6.5) and total["cases"] == 2
    with pytest.raises(InputError):
        period_cost([a, {**b, "currency": "USD"}])  # currencies are never converted


def test_compare_scenarios_side_by_side():
    df = compare_costs(
        {
            "high flow": {"currency": "EUR", "agent": 10.0, "gases": 2.0, "absorbent": 0.2, "total": 12.2},
            "low flow": {"currency": "EUR", "agent": 3.0, "gases": 0.5, "absorbent": 0.6, "total": 4.1},
        }
    )
    assert df.loc["total", "change vs high flow: low flow"] == pytest.approx(-8.1)
    assert df.attrs["currency"] == "EUR"


def test_cost_table_vectorised_matches_case_cost():
    usage = pd.DataFrame(
        {
            "agent": ["sevoflurane", "desflurane", ""],
            "agent_liquid_ml": [10.0, 20.0, 0.0],
            "oxygen_l": [100.0, 0.0, 50.0],
            "air_l": [0.0, 10.0, 0.0],
            "nitrous_oxide_l": [0, 0, 200.0],
        }
    )
    t = cost_table(usage, DEMO_PRICES)
    for i, row in usage.iterrows():
        one = case_cost(
            {
                "agent_liquid": row["agent_liquid_ml"],
                "oxygen": row["oxygen_l"],
                "air": row["air_l"],
                "nitrous_oxide": row["nitrous_oxide_l"],
            },
            DEMO_PRICES,
            row["agent"] or None,
        )
        assert t["total"].iloc[i] == pytest.approx(one["total"])


def test_load_prices_from_scenario_table(tmp_path):
    path = tmp_path / "prices.toml"
    path.write_text('title = "x"\n[prices]\ncurrency = "CHF"\nagent_per_ml = 0.5\nair_per_m3 = 3\n', encoding="utf-8")
    p = load_prices(path)
    assert p.currency == "CHF" and p.gas_per_litre["air"] == pytest.approx(0.003)


def test_demo_prices_say_they_are_invented():
    assert "invented" in DEMO_PRICES.note
