"""Tests for tco.scenario: loading, units in every field, defaults with sources, errors."""
from pathlib import Path

import pytest

from tco.errors import InputError
from tco.scenario import field_sources, load_scenario, parse_scenario


def minimal(**over) -> dict:
    data = {
        "study": {"name": "Test study", "currency": "EUR"},
        "route": {"legs": [{"name": "out", "payload": 20, "segments": [
            {"length": 10, "speed": 80}]}]},
        "trucks": [
            {"name": "D", "powertrain": "diesel", "body": {"curb_mass": 15},
             "diesel": {"engine_power": 330}},
            {"name": "E", "powertrain": "electric", "body": {"curb_mass": 18},
             "electric": {"battery_capacity": 600, "motor_power": 400}},
        ],
    }
    data.update(over)
    return data


def test_numbers_take_the_default_unit_and_strings_their_own():
    s = parse_scenario(minimal())
    assert s.route.legs[0].payload == 20_000.0          # t -> kg
    assert s.route.legs[0].segments[0].speed == pytest.approx(80 / 3.6)
    assert s.trucks[0].diesel.engine_power == 330_000.0
    d = minimal()
    d["trucks"][0]["body"] = {"curb_mass": "33000 lb", "frontal_area": "107 ft^2"}
    d["route"]["legs"][0]["segments"][0].update(speed="50 mph", grade="3 %", length="2 mi")
    s = parse_scenario(d)
    # 1 lb = 0.45359237 kg, 1 ft = 0.3048 m, 1 mi = 1609.344 m (exact definitions)
    assert s.trucks[0].body.curb_mass == pytest.approx(33000 * 0.45359237)
    assert s.trucks[0].body.frontal_area == pytest.approx(107 * 0.3048**2)
    seg = s.route.legs[0].segments[0]
    assert seg.speed == pytest.approx(50 * 1609.344 / 3600)
    assert seg.grade == pytest.approx(0.03)
    assert seg.length == pytest.approx(2 * 1609.344)


def test_defaults_are_converted_and_cited():
    s = parse_scenario(minimal())
    # 2.42 L/h idle default (US DOE VTO Fact #861) in m³/s
    assert s.trucks[0].diesel.idle_fuel_rate == pytest.approx(2.42e-3 / 3600)
    rows = {r["field"]: r for r in field_sources(s)}
    assert rows["trucks[0].diesel.idle_fuel_rate"]["source"].startswith("US DOE")
    assert rows["trucks[0].diesel.engine_power"]["source"] == "user"
    assert rows["trucks[0].body.rolling_resistance"]["unit"] == ""
    for r in rows.values():
        assert r["source"], r


@pytest.mark.parametrize(
    "mutate, where, fragment",
    [
        (lambda d: d["trucks"][0]["body"].update(curb_mass=-5), "trucks[0].body.curb_mass",
         "greater than"),
        (lambda d: d["route"]["legs"][0]["segments"][0].update(speed="55 kg"),
         "route.legs[0].segments[0].speed", "is not a speed"),
        (lambda d: d["route"]["legs"][0]["segments"][0].update(grade=31),
         "route.legs[0].segments[0].grade", "at most 30"),
        (lambda d: d["trucks"][1]["electric"].update(colour="red"),
         "trucks[1].electric.colour", "unknown field"),
        (lambda d: d["trucks"][1].pop("electric"), "trucks[1]", "needs a [trucks.electric]"),
        (lambda d: d["study"].update(currency="euro"), "study.currency", "ISO 4217"),
        (lambda d: d["study"].update(slug="../x"), "study.slug", "not a valid file name"),
        (lambda d: d["trucks"].pop(), "trucks", "at least 2"),
        (lambda d: d["trucks"][1].update(name="D"), None, "unique"),
        (lambda d: d["route"]["legs"][0].pop("payload"), "route.legs[0].payload", "missing"),
    ],
)
def test_bad_fields_name_the_field(mutate, where, fragment):
    d = minimal()
    mutate(d)
    with pytest.raises(InputError) as info:
        parse_scenario(d, Path("s.toml"))
    line = info.value.line()
    assert line.startswith("s.toml")
    if where:
        assert where in line
    assert fragment in line
    assert "\n" not in line


def test_load_errors(tmp_path):
    with pytest.raises(InputError, match="file not found"):
        load_scenario(tmp_path / "nope.toml")
    bad = tmp_path / "bad.toml"
    bad.write_text("[study\nname = 1")
    with pytest.raises(InputError, match="not valid TOML"):
        load_scenario(bad)
    missing_trace = tmp_path / "m.toml"
    missing_trace.write_text(
        '[study]\nname="x"\n[[route.legs]]\npayload=1\nfile="gone.csv"\n'
        '[[trucks]]\nname="a"\npowertrain="diesel"\nbody={curb_mass=1}\n'
        'diesel={engine_power=1}\n[[trucks]]\nname="b"\npowertrain="diesel"\n'
        'body={curb_mass=1}\ndiesel={engine_power=1}\n')
    with pytest.raises(InputError, match=r"route.legs\[0\].file: trace file 'gone.csv'"):
        load_scenario(missing_trace)




def test_unset_escalations_follow_inflation_in_nominal_money():
    """In nominal money an escalation left unset is general inflation (0 % real); one the
    user gives is kept; in real money an unset one is 0 (already above inflation)."""
    import tomllib

    from tco.resources import demo_path
    from tco.scenario import parse_scenario

    raw = tomllib.loads(demo_path().read_text(encoding="utf-8"))
    raw["finance"]["inflation"] = 0.03
    s = parse_scenario(raw)
    assert s.trucks[0].costs.escalation.maintenance == 0.03
    assert s.prices.escalation.equipment == 0.03
    assert s.finance.driver_cost_escalation == 0.03
    assert s.prices.escalation.diesel == 0.025          # given in the demo
    assert "trucks[0].costs.escalation.maintenance" in s.unset_escalations()
    assert "prices.escalation.diesel" not in s.unset_escalations()
    raw["finance"]["money_basis"] = "real"
    s = parse_scenario(raw)
    assert s.trucks[0].costs.escalation.maintenance == 0.0
    assert s.unset_escalations() == []
