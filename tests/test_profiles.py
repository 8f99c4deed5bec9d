"""The built-in profiles: their values against the domain brief, their provenance, lookups."""

from __future__ import annotations

import pytest

from drc import profiles
from drc.errors import InputErrors

# Per cell (low, high, nominal), V. Domain brief, "Battery life range per cell", from memory;
# the nominal figures and lifepo4 are from memory (common label voltages), not the brief.
BATTERIES = {
    "alkaline": (0.9, 1.6, 1.5),
    "nimh": (1.0, 1.4, 1.2),
    "lithium-coin": (2.0, 3.3, 3.0),
    "li-ion": (3.0, 4.2, 3.7),
    "lifepo4": (2.5, 3.65, 3.2),
}

# Forward voltage near 1 mA / 20 mA, V. Domain brief, "Facts of the trade", from memory.
FORWARD = {
    "red": (1.8, 2.0), "amber": (1.9, 2.1), "yellow": (1.9, 2.1), "green": (2.6, 3.1),
    "blue": (2.6, 3.1), "white": (2.6, 3.1), "infrared": (1.1, 1.3),
}


@pytest.mark.parametrize("name", sorted(BATTERIES))
def test_battery_per_cell(name):
    low, high, nominal = BATTERIES[name]
    profile = profiles.battery(name)
    # domain brief (from memory): the per-cell life range
    assert (profile.low_V, profile.high_V) == pytest.approx((low, high))
    # from memory: the label voltage, inside the range
    assert profile.nominal_V == pytest.approx(nominal)
    assert profile.low_V <= profile.nominal_V <= profile.high_V


def test_every_battery_says_where_it_comes_from():
    for name in BATTERIES:
        provenance = profiles.battery(name).provenance
        # the task brief: each entry carries "from memory" or a named standard
        assert "from memory" in provenance or "IEC" in provenance
    # domain brief: IEC 60086-2 sets end-points per test for primary cells
    assert "IEC 60086-2" in profiles.battery("alkaline").provenance


def test_battery_names_are_exactly_the_brief_s():
    # task brief: the five chemistries, in the file's order
    assert profiles.battery_names() == ("alkaline", "nimh", "lithium-coin", "li-ion", "lifepo4")


def test_battery_lookup_ignores_case_and_suggests():
    assert profiles.battery("Li-Ion").name == "li-ion"
    with pytest.raises(KeyError) as caught:
        profiles.battery("alkalin")
    # difflib's closest match for a one-letter slip
    assert "did you mean 'alkaline'" in str(caught.value)


def test_pin_default():
    pin = profiles.pin_default()
    # domain brief (from memory): 25 to 60 ohm at 3 V; 20 to 25 mA per pin; clamp at
    # supply + 0.3 V, about 5 mA injection; 80 to 150 mA per package. The task picks 40 ohm,
    # 20 mA and 100 mA from those spans.
    assert pin.output_resistance_ohm == pytest.approx(40.0)
    assert pin.max_current_A == pytest.approx(20e-3)
    assert pin.clamp_above_supply_V == pytest.approx(0.3)
    assert pin.clamp_current_A == pytest.approx(5e-3)
    assert pin.package_current_A == pytest.approx(100e-3)
    assert "from memory" in pin.provenance


@pytest.mark.parametrize("colour", sorted(FORWARD))
def test_led_colour(colour):
    led = profiles.led(colour)
    # domain brief (from memory): forward voltage near 1 mA and 20 mA
    assert (led.vf_1mA_V, led.vf_20mA_V) == pytest.approx(FORWARD[colour])
    # domain brief: "Reverse rating usually 5 V"; 20 mA rating common practice
    assert led.max_reverse_V == pytest.approx(5.0)
    assert led.max_current_A == pytest.approx(20e-3)
    # contract's example visible_current = "0.5 mA" (common practice)
    assert led.visible_current_A == pytest.approx(0.5e-3)
    # domain brief (common practice): forward voltage falls 1.5 to 4 mV per degree C
    assert -4e-3 <= led.tempco_V_per_K <= -1.5e-3
    assert led.provenance


def test_colours_are_the_contract_s():
    # contract, [led] colour: red, amber, yellow, green, blue, white, infrared
    assert profiles.colours() == ("red", "amber", "yellow", "green", "blue", "white", "infrared")


def test_eye_safety_cautions():
    # domain brief, "Cautions": infrared and high-brightness LEDs have eye-safety limits
    # (IEC 62471); blue and white carry it by our choice (blue-light hazard), see profiles.toml
    flagged = {c for c in profiles.colours() if profiles.led(c).eye_safety}
    assert flagged == {"infrared", "blue", "white"}


def test_unknown_colour_suggests():
    with pytest.raises(KeyError) as caught:
        profiles.led("whit")
    assert "did you mean 'white'" in str(caught.value)


@pytest.mark.parametrize("vf, colour", [
    (1.80, "red"), (1.75, "red"), (1.12, "infrared"), (0.9, "infrared"),
    (2.6, "white"), (2.9, "white"), (2.45, "white"),
    (1.9, "amber"), (1.95, "amber"),
])
def test_infer_colour(vf, colour):
    # nearest forward voltage at 1 mA (domain brief values); ties as documented in profiles.py
    assert profiles.infer_colour(vf) == colour


def test_infer_colour_picks_the_nearer_neighbour():
    # 1.84 V is 0.04 V from red's 1.8 V and 0.06 V from amber's 1.9 V (domain brief values)
    assert profiles.infer_colour(1.84) == "red"
    assert profiles.infer_colour(1.86) == "amber"


def test_infer_colour_refuses_nan():
    with pytest.raises(ValueError):
        profiles.infer_colour(float("nan"))


def test_load_reads_the_file_once():
    # functools.cache: the same object every time
    assert profiles.load() is profiles.load()


def test_profiles_file_ships_in_the_package():
    # pyproject: package-data "*.toml" for drc; the file sits beside the module
    assert profiles.PROFILES_FILE.parent.name == "drc"
    assert profiles.PROFILES_FILE.is_file()


def test_a_broken_profiles_file_is_located(tmp_path):
    bad = tmp_path / "profiles.toml"
    bad.write_text('[battery.alkaline]\nlow = "0.9 A"\nhigh = "1.6 V"\nnominal = "1.5 V"\n'
                   'provenance = "x"\n\n[pin.cmos]\noutput_resistance = "40 ohm"\n',
                   encoding="utf-8")
    with pytest.raises(InputErrors) as caught:
        profiles.load_file(bad)
    lines = {(e.location.line, e.message.split()[0]) for e in caught.value.errors}
    # line 2 holds the ampere where a voltage belongs; line 7 the pin lacking its keys
    assert (2, "low") in lines
    assert any(line == 7 for line, _ in lines)
