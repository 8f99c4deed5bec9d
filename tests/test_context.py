"""The design context: finding the files, reading quantities, every default listed, every error located."""

from __future__ import annotations

import textwrap
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from drc.context import find_config, load_context
from drc.errors import InputError, InputErrors, Location
from drc.quantities import TomlLocations, parse_quantity

HERE = Location("test.toml", 3, 1)


# ------------------------------------------------------------------ helpers

def tree(root: Path, files: dict[str, str]) -> None:
    for name, text in files.items():
        path = root / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(textwrap.dedent(text), encoding="utf-8")


def context_of(tmp_path: Path, config: str, **kwargs):
    tree(tmp_path, {"drc.toml": config, "board.cir": "* board\n"})
    return load_context(tmp_path / "board.cir", **kwargs)


def errors_of(tmp_path: Path, config: str, **kwargs) -> list[InputError]:
    with pytest.raises((InputError, InputErrors)) as caught:
        context_of(tmp_path, config, **kwargs)
    error = caught.value
    return error.errors if isinstance(error, InputErrors) else [error]


def only_error(tmp_path: Path, config: str, **kwargs) -> InputError:
    errors = errors_of(tmp_path, config, **kwargs)
    assert len(errors) == 1, [str(e) for e in errors]
    return errors[0]


# ------------------------------------------------------------------ discovery

def test_explicit_config_wins_over_drc_toml(tmp_path):
    tree(tmp_path, {"drc.toml": "", "sub/board.cir": "", "other.toml": ""})
    # contract: "--config FILE" comes first
    assert find_config(tmp_path / "sub/board.cir", tmp_path / "other.toml") == \
        [tmp_path / "other.toml"]


def test_nearest_drc_toml_above_the_netlist(tmp_path):
    tree(tmp_path, {"drc.toml": "", "a/drc.toml": "", "a/b/board.cir": ""})
    # contract: drc.toml in the netlist's folder or the nearest folder above it
    assert find_config(tmp_path / "a/b/board.cir", None) == [tmp_path / "a/drc.toml"]
    tree(tmp_path, {"a/b/drc.toml": ""})
    assert find_config(tmp_path / "a/b/board.cir", None) == [tmp_path / "a/b/drc.toml"]


def test_pyproject_tool_drc_when_no_drc_toml(tmp_path):
    tree(tmp_path, {
        "pyproject.toml": "[tool.drc]\n[tool.drc.tolerance]\nresistor = \"1 %\"\n",
        "hw/pyproject.toml": "[project]\nname = \"x\"\n",     # no [tool.drc]: skipped
        "hw/board.cir": "",
    })
    # contract: [tool.drc] in the nearest pyproject.toml above; ours: one without it is passed
    assert find_config(tmp_path / "hw/board.cir", None) == [tmp_path / "pyproject.toml"]
    context = load_context(tmp_path / "hw/board.cir")
    # pint: percent = 0.01
    assert context.resistor_tolerance == pytest.approx(0.01)


def test_drc_toml_comes_before_a_nearer_pyproject(tmp_path):
    tree(tmp_path, {"drc.toml": "", "hw/pyproject.toml": "[tool.drc]\n", "hw/board.cir": ""})
    # contract: the order is drc.toml, then pyproject.toml
    assert find_config(tmp_path / "hw/board.cir", None) == [tmp_path / "drc.toml"]


def test_netlist_own_toml_comes_last(tmp_path):
    tree(tmp_path, {"drc.toml": "", "board.cir": "", "board.toml": "", "other.toml": ""})
    # contract: NETLIST.toml beside NETLIST.cir applies to it alone and wins
    assert find_config(tmp_path / "board.cir", None) == \
        [tmp_path / "drc.toml", tmp_path / "board.toml"]
    assert find_config(tmp_path / "board.cir", tmp_path / "other.toml") == \
        [tmp_path / "other.toml", tmp_path / "board.toml"]
    # the same file is not used twice
    assert find_config(tmp_path / "board.cir", tmp_path / "board.toml") == \
        [tmp_path / "board.toml"]


def test_no_config_at_all(tmp_path):
    tree(tmp_path, {"board.cir": ""})
    assert find_config(tmp_path / "board.cir", None) == []
    context = load_context(tmp_path / "board.cir")
    assert context.files == []
    assert any("no design context file" in a for a in context.assumptions)


def test_netlist_toml_overlays_key_by_key(tmp_path):
    tree(tmp_path, {
        "drc.toml": """\
            [supply.VBAT]
            source = "VBAT"
            battery = "alkaline"
            cells = 2
            package_current = "80 mA"
            [tolerance]
            resistor = "1 %"
            """,
        "board.toml": """\
            [supply.vbat]
            range = ["2.0 V", "3.2 V"]
            [tolerance]
            capacitor = "10 %"
            """,
        "board.cir": "",
    })
    context = load_context(tmp_path / "board.cir")
    supply = context.supplies["VBAT"]
    # ours (context.py doc): range replaces the inherited battery; other keys stay
    assert (supply.low_V, supply.high_V) == (2.0, 3.2)
    assert supply.battery is None and supply.cells is None
    assert supply.package_current_A == pytest.approx(0.08)
    assert supply.source == "VBAT"
    assert (context.resistor_tolerance, context.capacitor_tolerance) == pytest.approx((0.01, 0.1))
    assert len(context.files) == 2 and context.files[-1].endswith("board.toml")


# ------------------------------------------------------------------ quantities

@pytest.mark.parametrize("text, kind, expected", [
    # SI prefixes (BIPM SI brochure, as pint defines them): k = 1e3, m = 1e-3, u/µ = 1e-6
    ("1.8 V", "voltage", 1.8),
    ("1.8V", "voltage", 1.8),
    ("1800 mV", "voltage", 1.8),
    ("20 mA", "current", 0.02),
    ("100 uA", "current", 1e-4),
    ("40 ohm", "resistance", 40.0),
    ("40 Ω", "resistance", 40.0),
    ("4.7 kohm", "resistance", 4700.0),
    ("2 kHz", "frequency", 2000.0),
    ("10 uF", "capacitance", 1e-5),
    ("10 µF", "capacitance", 1e-5),      # micro sign U+00B5
    ("10 μF", "capacitance", 1e-5),      # Greek mu U+03BC
    ("100 nF", "capacitance", 1e-7),
    ("50 %", "fraction", 0.5),
    ("5 percent", "fraction", 0.05),
    ("10 ms", "time", 0.01),
    ("1 min", "time", 60.0),             # pint: minute = 60 s
    # temperatures in °C: pint's degC is K - 273.15, degF is (°C * 9/5) + 32
    ("-20 degC", "temperature", -20.0),
    ("253.15 K", "temperature", -20.0),
    ("-4 degF", "temperature", -20.0),
])
def test_quantity_spellings(text, kind, expected):
    assert parse_quantity(text, kind, HERE, "key") == pytest.approx(expected, rel=1e-12)


@settings(max_examples=60, deadline=None)
@given(st.floats(min_value=-1e6, max_value=1e6, allow_nan=False))
def test_millivolts_are_thousandths(value):
    # SI: milli = 1e-3
    assert parse_quantity(f"{value!r} mV", "voltage", HERE, "key") == \
        pytest.approx(value / 1000, rel=1e-12, abs=1e-300)


@pytest.mark.parametrize("text, kind, words", [
    ("20 mA", "voltage", ["range", "wants volts", "got amperes"]),
    ("3 V", "fraction", ["range", "wants percent", "got volts"]),
    ("1.8", "voltage", ["range", "no unit", '"1.8 V"']),
    ("1.8 volz", "voltage", ["range", "unknown unit 'volz'"]),
    # malformed unit expressions: pint's parser raised AssertionError / TokenError for these
    ("3 V/", "voltage", ["range", "unknown unit 'V/'", "not a unit expression"]),
    ("3 (V", "voltage", ["range", "unknown unit '(V'"]),
    ("3 V)", "voltage", ["range", "unknown unit 'V)'"]),
    ("3 V**", "voltage", ["range", "unknown unit 'V**'"]),
    ("volts", "voltage", ["range", "cannot read"]),
    ("5 delta_degC", "temperature", ["range", "difference"]),
    ("-300 degC", "temperature", ["below absolute zero"]),
])
def test_quantity_errors_name_the_key(text, kind, words):
    with pytest.raises(InputError) as caught:
        parse_quantity(text, kind, HERE, "range")
    assert caught.value.location == HERE
    for word in words:
        assert word in caught.value.message


@pytest.mark.parametrize("value", [1.8, 3, True, ["1 V"]])
def test_quantity_wrong_type_explains_the_fix(value):
    with pytest.raises(InputError) as caught:
        parse_quantity(value, "voltage", HERE, "nominal")
    # task brief: a number where a string is wanted explains: write "1.8 V"
    assert 'nominal = "1.8 V"' in caught.value.message


# ------------------------------------------------------------------ the values

def test_battery_times_cells(tmp_path):
    context = context_of(tmp_path, """\
        [supply.VBAT]
        source = "VBAT"
        battery = "alkaline"
        cells = 2
        """)
    supply = context.supplies["VBAT"]
    # domain brief (from memory): alkaline 0.9 V spent to 1.6 V fresh per cell, times two
    assert (supply.low_V, supply.high_V) == pytest.approx((1.8, 3.2))
    assert supply.nominal_V is None
    # contract: nominal defaults to the source's DC value
    assert supply.nominal_at(3.0)[0] == pytest.approx(3.0)
    # ours, profiles: with no DC value, 1.5 V label voltage per cell (from memory) times two
    value, assumption = supply.nominal_at(None)
    assert value == pytest.approx(3.0) and "alkaline" in assumption


def test_one_cell_is_assumed(tmp_path):
    context = context_of(tmp_path, '[supply.VBAT]\nbattery = "lithium-coin"\n')
    supply = context.supplies["VBAT"]
    # domain brief (from memory): lithium coin 2.0 V to 3.3 V
    assert (supply.low_V, supply.high_V, supply.cells) == (2.0, 3.3, 1)
    assert any("VBAT" in a and "1 cell" in a for a in context.assumptions)


def test_range_and_its_middle(tmp_path):
    context = context_of(tmp_path, '[supply.VDD]\nnet = "vdd"\nrange = ["1.62 V", "1.98 V"]\n')
    supply = context.supplies["VDD"]
    # contract: nominal defaults to the source's DC value, else the middle of range
    assert supply.nominal_at(None)[0] == pytest.approx(1.8)
    assert supply.nominal_at(1.7)[0] == pytest.approx(1.7)
    # a DC value outside the range is not a credible nominal: the middle again
    assert supply.nominal_at(3.3)[0] == pytest.approx(1.8)


def test_supply_without_range_is_left_to_the_source(tmp_path):
    context = context_of(tmp_path, '[supply.VDD]\nsource = "V1"\n')
    supply = context.supplies["VDD"]
    assert supply.low_V is None and supply.high_V is None
    assert supply.nominal_at(3.3)[0] == 3.3
    # contract: names compare without regard to case
    assert context.supply("v1") is supply and context.supply("vdd") is supply


def test_pin_values_and_their_defaults(tmp_path):
    context = context_of(tmp_path, """\
        [pin.PA6]
        net = "pa"
        supply = "VBAT"
        drive = "toggle"
        frequency = "2 kHz"
        phase = "inverted"
        [pin.PB1]
        source = "VPB"
        output_resistance = "25 ohm"
        max_current = "8 mA"
        clamp_above_supply = "0.5 V"
        clamp_current = "2 mA"
        """)
    toggle, plain = context.pins["PA6"], context.pins["PB1"]
    assert (toggle.drive, toggle.frequency_Hz, toggle.phase) == ("toggle", 2000.0, "inverted")
    # built-in pin profile, domain brief (from memory): 40 ohm, 20 mA, +0.3 V, 5 mA
    assert (toggle.output_resistance_ohm, toggle.max_current_A) == pytest.approx((40.0, 0.02))
    assert (toggle.clamp_above_supply_V, toggle.clamp_current_A) == pytest.approx((0.3, 5e-3))
    # ours: duty defaults to half the period for a toggling pin
    assert toggle.duty == 0.5
    pa6 = [a for a in context.assumptions if "PA6" in a]
    for key in ("output_resistance", "max_current", "clamp_above_supply", "clamp_current",
                "duty"):
        assert any(key in a for a in pa6), key
    # a source pin's timing comes from its waveform; everything given, nothing assumed
    assert plain.drive is None and plain.frequency_Hz is None and plain.duty is None
    assert (plain.output_resistance_ohm, plain.max_current_A) == pytest.approx((25.0, 8e-3))
    assert not [a for a in context.assumptions if "PB1" in a]


def test_net_pin_with_no_drive_is_assumed_high(tmp_path):
    context = context_of(tmp_path, '[pin.P1]\nnet = "p1"\n')
    assert context.pins["P1"].drive == "high"
    assert any("P1" in a and "drive" in a for a in context.assumptions)


def test_led_values_and_defaults(tmp_path):
    context = context_of(tmp_path, """\
        [led.LEDW]
        element = "X2.D22"
        colour = "White"
        max_current = "10 mA"
        [led.PLAIN]
        model = "LEDX"
        """)
    white, plain = context.leds["LEDW"], context.leds["PLAIN"]
    # contract's example: visible_current "0.5 mA" (common practice); reverse 5 V (brief)
    assert (white.colour, white.visible_current_A, white.max_reverse_V) == ("white", 5e-4, 5.0)
    assert white.max_current_A == pytest.approx(0.01)
    assert any("LEDW" in a and "visible_current" in a for a in context.assumptions)
    assert not any("LEDW" in a and "max_current" in a for a in context.assumptions)
    # no colour: the ratings wait for the colour the analysis infers
    assert plain.colour is None and plain.visible_current_A is None
    # contract: element paths compare without regard to case
    assert context.led("x2.d22") is white
    assert context.led("D5", model="ledx") is plain


def test_ambient_and_tolerance_defaults(tmp_path):
    context = context_of(tmp_path, "")
    # ours, listed as assumptions: -20 °C to 60 °C, 5 %, 20 % (common practice)
    assert context.temperature_C == (-20.0, 60.0)
    # contract: "SPICE's own nominal temperature is the default" (27 °C, SPICE's TNOM)
    assert context.nominal_temperature_C == 27.0
    assert (context.resistor_tolerance, context.capacitor_tolerance) == (0.05, 0.20)
    text = " | ".join(context.assumptions)
    for words in ("[ambient] temperature", "[ambient] nominal", "[tolerance] resistor",
                  "[tolerance] capacitor"):
        assert words in text


def test_ambient_given(tmp_path):
    context = context_of(tmp_path, """\
        [ambient]
        temperature = ["-40 degC", "85 degC"]
        nominal = "25 degC"
        """)
    assert context.temperature_C == (-40.0, 85.0)
    assert context.nominal_temperature_C == 25.0
    assert not any("[ambient]" in a for a in context.assumptions)


def test_spice_nominal_outside_the_range_moves_to_its_end(tmp_path):
    context = context_of(tmp_path, '[ambient]\ntemperature = ["40 degC", "85 degC"]\n')
    assert context.nominal_temperature_C == 40.0
    assert any("outside the range" in a for a in context.assumptions)


def test_rules_limits_and_folders(tmp_path):
    context = context_of(tmp_path, """\
        [rule."led-headroom"]
        severity = "warning"
        margin = "0.1 V"
        [rule.flicker]
        enabled = false
        [house_rules]
        folders = ["checks"]
        [limits]
        max_elements = 5000
        max_file_bytes = "2 MiB"
        include_folders = ["lib"]
        house_rule_time = "1500 ms"
        """, rule_ids=["led-headroom", "flicker"])
    assert context.rules["led-headroom"] == {"severity": "warning", "margin": "0.1 V"}
    assert context.rules["flicker"]["enabled"] is False
    # ours: folders resolve against the config file's folder
    assert context.rule_folders == [(tmp_path / "checks").absolute()]
    assert context.limits.include_folders == ((tmp_path / "lib").absolute(),)
    # IEC 80000-13: Mi = 2**20
    assert context.limits.max_file_bytes == 2 * 2 ** 20
    assert context.limits.max_elements == 5000
    assert context.limits.house_rule_seconds == pytest.approx(1.5)
    # where a raw rule key sits, for the rule's own messages
    assert context.location_of("rule", "led-headroom", "margin").line == 3


def test_limits_defaults(tmp_path):
    limits = context_of(tmp_path, "").limits
    # the task brief: 1 000 000 elements, 16 MiB, 10 s
    assert (limits.max_elements, limits.max_file_bytes, limits.house_rule_seconds) == \
        (1_000_000, 16 * 2 ** 20, 10.0)


def test_pyproject_locations_are_in_the_pyproject(tmp_path):
    tree(tmp_path, {"pyproject.toml": '[project]\nname = "x"\n\n[tool.drc.supply.VBAT]\n'
                                      'rnage = ["1 V", "2 V"]\n',
                    "board.cir": ""})
    with pytest.raises(InputError) as caught:
        load_context(tmp_path / "board.cir")
    assert caught.value.location.path.endswith("pyproject.toml")
    assert caught.value.location.line == 5


# ------------------------------------------------------------------ errors, located

def test_toml_syntax_error_has_its_line_and_column(tmp_path):
    error = only_error(tmp_path, '[supply.VBAT]\nsource = "VBAT"\nrange = ["1 V", \n')
    # tomllib's message carries "(at line X, column Y)"; the file ends inside the list
    assert error.location.line >= 3
    assert "TOML syntax" in error.message
    error = only_error(tmp_path, '[ambient]\ntemperature = -20 degC\n')
    assert (error.location.line, error.location.column) == (2, 19)


def test_unknown_key_suggests_the_closest(tmp_path):
    error = only_error(tmp_path, """\
        [supply.VBAT]
        source = "VBAT"
          rnage = ["2.0 V", "3.2 V"]
        """)
    assert (error.location.line, error.location.column) == (3, 3)
    assert "unknown key 'rnage' in [supply.VBAT]; did you mean 'range'?" in error.message


def test_unknown_table_suggests_the_closest(tmp_path):
    error = only_error(tmp_path, '\n[supplies.VBAT]\nsource = "VBAT"\n')
    assert error.location.line == 2
    assert "unknown table [supplies]" in error.message and "'supply'" in error.message


def test_colour_spelling_suggests(tmp_path):
    error = only_error(tmp_path, '[led.D1]\ncolor = "red"\n')
    assert error.location.line == 2 and "did you mean 'colour'" in error.message


@pytest.mark.parametrize("config, line, words", [
    ('[supply.V]\nrange = ["2 V", "20 mA"]\n', 2, ["range", "wants volts", "got amperes"]),
    ('[supply.V]\nnominal = 3.0\n', 2, ["nominal", 'nominal = "1.8 V"']),
    ('[supply.V]\nnominal = "3.0"\n', 2, ["nominal", "no unit"]),
    ('[supply.V]\n\nrange = ["2 V"]\n', 3, ["range", "list of two"]),
    ('[supply.V]\nrange = "2 V"\n', 2, ["range", "list of two"]),
    ('[supply.V]\nrange = ["3.2 V", "2.0 V"]\n', 2, ["low end first"]),
    ('[supply.V]\nrange = ["2 V", "3 V"]\nnominal = "3.3 V"\n', 3, ["outside the range"]),
    ('[supply.V]\nbattery = "alkalin"\n', 2, ["unknown battery", "did you mean 'alkaline'"]),
    ('[supply.V]\nbattery = "nimh"\ncells = 0\n', 3, ["cells", "at least 1"]),
    ('[supply.V]\nbattery = "nimh"\ncells = "2"\n', 3, ["cells", "whole number"]),
    ('[supply.V]\nrange = ["2 V", "3 V"]\ncells = 2\n', 3, ["cells applies only with battery"]),
    ('[supply.V]\nrange = ["2 V", "3 V"]\nbattery = "nimh"\n', 3, ["range or battery"]),
    ('[supply.V]\nsource = "V1"\nnet = "v"\n', 3, ["source or net"]),
    ('[led.D1]\ncolour = "whte"\n', 2, ["colour", "did you mean 'white'"]),
    ('[led.D1]\ncolour = "red"\nvisible_current = "30 mA"\n', 3, ["above max_current"]),
    ('[pin.P]\nnet = "p"\ndrive = "toogle"\n', 3, ["high, low, toggle, input",
                                                  "did you mean 'toggle'"]),
    ('[pin.P]\nnet = "p"\ndrive = "toggle"\nfrequency = "1 kHz"\nduty = "150 %"\n', 5,
     ["duty", "0 % to 100 %"]),
    ('[pin.P]\nnet = "p"\ndrive = "toggle"\n', 3, ["needs frequency"]),
    ('[pin.P]\nnet = "p"\ndrive = "toggle"\nfrequency = "-1 kHz"\n', 4, ["above zero"]),
    ('[pin.P]\nsource = "VP"\nduty = "50 %"\n', 3, ["net pins", "remove 'duty'"]),
    ('[pin.P]\nnet = "p"\nphase = "inverse"\ndrive="toggle"\nfrequency="1 Hz"\n', 3,
     ["normal, inverted", "did you mean 'inverted'"]),
    ('[pin.P]\noutput_resistance = "40 mA"\n', 2, ["output_resistance", "wants ohms"]),
    ('[ambient]\ntemperature = ["-20 degC", "60 V"]\n', 2, ["wants degrees", "got volts"]),
    ('[ambient]\nnominal = "100 degC"\n', 2, ["outside the temperature range"]),
    ('[tolerance]\nresistor = "100 %"\n', 2, ["below 100 %"]),
    ('[tolerance]\nresistor = 0.05\n', 2, ['resistor = "50 %"']),
    ('[rule.flicker]\nseverity = "fatal"\n', 2, ["error, warning, note"]),
    ('[rule.flicker]\nenabled = "no"\n', 2, ["true or false"]),
    ('[limits]\nmax_file_bytes = "16 MB/s"\n', 2, ["max_file_bytes", "16 MiB"]),
    ('[supply]\nVBAT = "3 V"\n', 2, ["[supply.VBAT] must be a table"]),
    ('[supply.VBAT]\n[supply.vbat]\n', 2, ["repeats [supply.VBAT]"]),
])
def test_each_error_is_located_and_explained(tmp_path, config, line, words):
    error = only_error(tmp_path, config)
    assert error.location.path.endswith("drc.toml")
    assert error.location.line == line, error
    for word in words:
        assert word in error.message, error.message


def test_unknown_rule_suggests(tmp_path):
    error = only_error(tmp_path, '[rule.flikker]\n', rule_ids=["flicker", "led-headroom"])
    assert error.location.line == 1 and "did you mean 'flicker'" in error.message


def test_several_errors_come_together_in_order(tmp_path):
    errors = errors_of(tmp_path, """\
        [supply.VBAT]
        rnage = ["2 V", "3 V"]
        [led.D1]
        colour = "purple"
        [pin.P]
        net = "p"
        drive = "sideways"
        """)
    assert [e.location.line for e in errors] == [2, 4, 7]


def test_config_that_is_not_utf8(tmp_path):
    (tmp_path / "drc.toml").write_bytes(b'[supply.V]\nsource = "\xff"\n')
    (tmp_path / "board.cir").write_text("")
    with pytest.raises(InputError) as caught:
        load_context(tmp_path / "board.cir")
    assert caught.value.location.line == 2 and "UTF-8" in caught.value.message


def test_missing_explicit_config(tmp_path):
    (tmp_path / "board.cir").write_text("")
    with pytest.raises(InputError) as caught:
        load_context(tmp_path / "board.cir", tmp_path / "nope.toml")
    assert "cannot read config file" in caught.value.message


def test_locator_follows_multiline_values_and_quoted_keys():
    locations = TomlLocations(textwrap.dedent('''\
        [supply.VBAT]
        range = [
          "1 V",  # ] not the end
          "2 V",
        ]
        note = """
        fake = 1
        """
        [rule."led-headroom"]
          margin = "0.1 V"
        '''), "x.toml")
    assert locations.exact(("supply", "VBAT", "range")).line == 2
    assert locations.exact(("supply", "VBAT", "fake")) is None
    assert locations.exact(("supply", "VBAT", "note")).line == 6
    assert locations.exact(("rule", "led-headroom", "margin")) == Location("x.toml", 10, 3)
    # a key below a known one falls back to it (inline tables)
    assert locations.at(("rule", "led-headroom", "margin", "deeper")).line == 10
