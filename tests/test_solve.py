"""Tests of drc.solve: the branch solver against ngspice, the LED fit, the resistor chooser."""

import os
import sys

sys.path.insert(0, os.path.dirname(__file__))

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from drc.diode import DiodeParams, saturation_current, thermal_voltage, voltage_at_current
from drc.errors import InputError
from drc import preferred
from drc.solve import (CURRENT_CAP_A, choose_series_resistor, forward_voltage_at, led_model_from_forward_voltages,
                       solve_string)

from ngspice import op, require_ngspice

K0 = 273.15
TEMPS_C = [27.0, -20.0, 60.0]
# Tolerances of the brief: 0.5 % at 27 degC, 1 % at the temperature ends.
TOLERANCE = {27.0: 0.005, -20.0: 0.01, 60.0: 0.01}
# Tight ngspice options so that its own convergence does not blur the comparison.
OPTIONS = ".options reltol=1e-9 abstol=1e-18 vntol=1e-12"

# LED forward voltages at 1 mA / 20 mA (from memory, the domain brief's facts of the trade).
WHITE = led_model_from_forward_voltages(2.6, 3.1)
RED = led_model_from_forward_voltages(1.8, 2.0)
AMBER = led_model_from_forward_voltages(1.9, 2.1, tempco_V_per_K=-0.003)
# A hand-typed model card with RS = 0 (values of our own, typical of a red LED).
PLAIN = DiodeParams(IS=1e-19, N=1.9, RS=0.0, EG=1.9)


def card(name: str, d: DiodeParams) -> str:
    return (f".model {name} D(IS={d.IS:.17g} N={d.N:.17g} RS={d.RS:.17g} "
            f"EG={d.EG:.17g} XTI={d.XTI:.17g})")


def kelvin(temperature_C: float) -> np.ndarray:
    return np.array([temperature_C + K0])


# --- thermal voltage ------------------------------------------------------------------

def test_thermal_voltage_is_codata():
    # CODATA 2018 / SI 2019 exact constants: k = 1.380649e-23 J/K, q = 1.602176634e-19 C
    expected = 1.380649e-23 * 300.15 / 1.602176634e-19
    assert float(thermal_voltage(300.15)) == pytest.approx(expected, rel=1e-12)


# --- the solver against ngspice -------------------------------------------------------

CIRCUITS = {
    "one LED": (
        "V1 a 0 DC 3.0\nR1 a b 220\nD1 b 0 LP\n" + card("LP", PLAIN),
        3.0, 220.0, [[PLAIN]], [["@d1[id]"]]),
    "two in series": (
        "V1 a 0 DC 5.0\nR1 a b 150\nD1 b c LR\nD2 c 0 LW\n" + card("LR", RED) + "\n"
        + card("LW", WHITE),
        5.0, 150.0, [[RED], [WHITE]], [["@d1[id]"], ["@d2[id]"]]),
    "three different in parallel": (
        "V1 a 0 DC 3.3\nR1 a b 47\nD1 b 0 LW\nD2 b 0 LR\nD3 b 0 LA\n" + card("LW", WHITE)
        + "\n" + card("LR", RED) + "\n" + card("LA", AMBER),
        3.3, 47.0, [[WHITE, RED, AMBER]], [["@d1[id]", "@d2[id]", "@d3[id]"]]),
    "two equal in parallel": (       # one part number side by side: the explicit stage
        "V1 a 0 DC 3.3\nR1 a b 47\nD1 b 0 LW\nD2 b 0 LW\n" + card("LW", WHITE),
        3.3, 47.0, [[WHITE, WHITE]], [["@d1[id]", "@d2[id]"]]),
    "LED with RS": (
        "V1 a 0 DC 3.6\nR1 a b 68\nD1 b 0 LW\n" + card("LW", WHITE),
        3.6, 68.0, [[WHITE]], [["@d1[id]"]]),
    "R = 0, RS alone limits": (
        "V1 a 0 DC 3.0\nD1 a 0 LW\n" + card("LW", WHITE),
        3.0, 0.0, [[WHITE]], [["@d1[id]"]]),
}


@pytest.mark.parametrize("name", list(CIRCUITS))
def test_branch_current_matches_ngspice(name):
    require_ngspice()
    body, drive, resistance, stages, vectors = CIRCUITS[name]
    netlist = f"{name}\n{body}\n{OPTIONS}\n.end\n"
    flat = [v for stage in vectors for v in stage]
    reference = op(netlist, flat, temperatures_C=TEMPS_C)
    for temperature_C in TEMPS_C:
        sol = solve_string(np.array([drive]), np.array([resistance]), stages, kelvin(temperature_C))
        total = sum(reference[temperature_C][v] for v in vectors[0])
        # ngspice .op of the same netlist (reference simulator), brief's tolerance
        assert float(sol.current_A[0]) == pytest.approx(total, rel=TOLERANCE[temperature_C])
        for k, stage in enumerate(vectors):
            for j, vector in enumerate(stage):
                # ngspice .op: each diode's own current
                assert float(sol.diode_current_A[k][j][0]) == pytest.approx(
                    reference[temperature_C][vector], rel=TOLERANCE[temperature_C], abs=1e-9)


def test_stage_voltages_match_ngspice_node_voltages():
    require_ngspice()
    body, drive, resistance, stages, _ = CIRCUITS["two in series"]
    reference = op(f"series\n{body}\n{OPTIONS}\n.end\n", ["v(b)", "v(c)"], TEMPS_C)
    for temperature_C in TEMPS_C:
        sol = solve_string(drive, resistance, stages, kelvin(temperature_C))
        values = reference[temperature_C]
        # ngspice .op node voltages: v(b) - v(c) across the red LED, v(c) across the white
        assert float(sol.stage_V[0][0]) == pytest.approx(values["v(b)"] - values["v(c)"], abs=1e-4)
        assert float(sol.stage_V[1][0]) == pytest.approx(values["v(c)"], abs=1e-4)
        assert float(sol.forward_V[1][0][0]) == pytest.approx(values["v(c)"], abs=1e-4)


# --- exactness, against the diode law itself ------------------------------------------

diodes = st.builds(
    DiodeParams,
    IS=st.floats(-40, -3).map(lambda e: 10.0 ** e),
    N=st.floats(0.6, 8.0),
    RS=st.one_of(st.just(0.0), st.floats(-3, 3).map(lambda e: 10.0 ** e)),
    EG=st.floats(0.6, 3.5),
)


@settings(max_examples=30, deadline=None)
@given(stages=st.lists(st.lists(diodes, min_size=1, max_size=3), min_size=1, max_size=3),
       seed=st.integers(0, 2 ** 32 - 1))
def test_solution_satisfies_kirchhoff_and_shockley(stages, seed):
    _satisfies_kirchhoff_and_shockley(stages, seed)


@settings(max_examples=30, deadline=None)
@given(stages=st.lists(st.tuples(diodes, st.integers(2, 4)), min_size=1, max_size=3),
       seed=st.integers(0, 2 ** 32 - 1))
def test_equal_diodes_side_by_side_satisfy_kirchhoff_and_shockley(stages, seed):
    # one part number side by side in each stage (its voltage is worked out explicitly)
    _satisfies_kirchhoff_and_shockley([[d] * m for d, m in stages], seed)


def _satisfies_kirchhoff_and_shockley(stages, seed):
    rng = np.random.default_rng(seed)
    corners = 24
    drive = rng.uniform(-10, 10, corners)
    resistance = np.where(rng.random(corners) < 0.25, 0.0, 10.0 ** rng.uniform(-2, 6, corners))
    temperature = rng.uniform(220, 400, corners)
    sol = solve_string(drive, resistance, stages, temperature)
    assert np.all(np.isfinite(sol.current_A))
    floor = np.minimum.reduce([sum(saturation_current(d, temperature) for d in stage)
                               for stage in stages])
    # Shockley: a string cannot carry more reverse current than its weakest stage's IS
    assert np.all(sol.current_A >= -floor * (1 + 1e-9))
    # the sign of the current follows the drive (passive string)
    slack = 1e-9 * floor
    assert np.all((sol.current_A >= -slack)[drive > 0])
    assert np.all((sol.current_A <= slack)[drive < 0])
    # Kirchhoff's voltage law around the loop (except at a dead short: astronomically large
    # currents, up to the cap the solver documents, where the law check itself overflows)
    loop = sol.current_A * resistance + sum(sol.stage_V) - drive
    # Precision is checked where every saturation current is that of a real part (below
    # 1 mA at the corner's temperature); elsewhere it is a little of IS in absolute terms.
    unreal = np.maximum.reduce([saturation_current(d, temperature) for s in stages for d in s]) > 1e-3
    unchecked = (sol.current_A > 1e-100 * CURRENT_CAP_A) | unreal
    assert np.all(np.abs(loop[~unchecked]) < 1e-9 * (1 + np.abs(drive[~unchecked])))
    forward = sol.current_A > 1e-12
    for stage, currents, volts in zip(stages, sol.diode_current_A, sol.stage_V):
        # Kirchhoff's current law in each stage (each diode current is I_j + IS_j less IS_j,
        # so its absolute precision is a little of the stage's saturation current)
        stage_IS = sum(saturation_current(d, temperature) for d in stage)
        kcl = np.abs(sum(currents) - sol.current_A) <= 1e-9 * np.abs(sol.current_A) + 1e-12 * stage_IS
        assert np.all(kcl[~unchecked])
        for d, current in zip(stage, currents):
            on = (current > 1e-12) & ~unchecked
            with np.errstate(all="ignore"):
                law = voltage_at_current(d, current, temperature)
            # Shockley with RS (exact inverse, drc.diode): each diode's law holds at its voltage
            assert np.allclose(law[on], volts[on], rtol=0, atol=1e-9)


def test_current_is_accurate_to_1e_9_relative():
    # A string of single-diode stages has the explicit loop function
    # g(I) = I*R + sum(voltage_at_current) - V (Shockley with RS), increasing in I;
    # the solved I must sit inside [I*(1 - 1e-9), I*(1 + 1e-9)] around its root.
    stages = [[WHITE], [RED], [DiodeParams(IS=1e-35, N=1.0, RS=0.0)],
              [DiodeParams(IS=1e-4, N=1.2, RS=50.0)]]
    drive = np.linspace(3.0, 30.0, 50)
    resistance = np.geomspace(1e-3, 1e5, 50)
    temperature = np.linspace(230.0, 390.0, 50)
    sol = solve_string(drive, resistance, stages, temperature)

    def g(i):
        return i * resistance + sum(voltage_at_current(s[0], i, temperature) for s in stages) - drive

    assert np.all(g(sol.current_A * (1 - 1e-9)) < 0)
    assert np.all(g(sol.current_A * (1 + 1e-9)) > 0)


def test_reverse_and_zero_drive_give_no_current_and_no_nan():
    drive = np.array([-20.0, -5.0, -0.1, 0.0, 1e-9])
    for resistance in (0.0, 100.0):
        sol = solve_string(drive, resistance, [[WHITE], [RED, AMBER]], np.full(5, 300.15))
        assert np.all(np.isfinite(sol.current_A))
        # the diode law: reverse current is bounded by IS, far below a microamp
        assert np.all(np.abs(sol.current_A) < 1e-12)
        assert all(np.all(np.isfinite(v)) for v in sol.stage_V)


def test_dead_short_stays_finite():
    # R = 0 and RS = 0: the exponential alone limits the current (capped, never inf or NaN)
    sol = solve_string(np.array([0.5, 5.0, 50.0]), 0.0, [[DiodeParams()]], np.full(3, 300.15))
    assert np.all(np.isfinite(sol.current_A)) and np.all(sol.current_A > 0)
    # Shockley, RS = 0: at 0.5 V, I = IS*(exp(V/Vt) - 1) exactly
    vt = float(thermal_voltage(300.15))
    assert float(sol.current_A[0]) == pytest.approx(1e-14 * np.expm1(0.5 / vt), rel=1e-9)


def test_bad_input_is_an_input_error():
    with pytest.raises(InputError):
        solve_string(3.0, 100.0, [], 300.15)
    with pytest.raises(InputError):
        solve_string(3.0, 100.0, [[]], 300.15)
    with pytest.raises(InputError):
        solve_string(3.0, -1.0, [[WHITE]], 300.15)
    with pytest.raises(InputError):
        solve_string(np.nan, 1.0, [[WHITE]], 300.15)
    with pytest.raises(InputError):
        solve_string(3.0, 1.0, [["D1"]], 300.15)
    with pytest.raises(InputError):
        led_model_from_forward_voltages(3.1, 2.6)


# --- fitted LED models ----------------------------------------------------------------

FITS = [(1.8, 2.0, -0.002), (1.9, 2.1, -0.003), (2.6, 3.1, -0.002), (1.1, 1.3, -0.0015),
        (2.6, 3.1, -0.004)]


@pytest.mark.parametrize("v1, v20, tempco", FITS)
def test_fitted_model_passes_through_its_points_in_ngspice(v1, v20, tempco):
    require_ngspice()
    d = led_model_from_forward_voltages(v1, v20, tempco)
    netlist = (f"fit\nI1 0 a DC 1m\nD1 a 0 LF\nI2 0 b DC 20m\nD2 b 0 LF\n{card('LF', d)}\n"
               f"{OPTIONS}\n.end\n")
    reference = op(netlist, ["v(a)", "v(b)"], [27.0, 26.0, 28.0])
    # ngspice .op with a 1 mA and a 20 mA source into the model: the two given points
    assert reference[27.0]["v(a)"] == pytest.approx(v1, abs=1e-5)
    assert reference[27.0]["v(b)"] == pytest.approx(v20, abs=1e-5)
    # ngspice: dV/dT at 1 mA (central difference over 26..28 degC) is the requested tempco
    slope = (reference[28.0]["v(a)"] - reference[26.0]["v(a)"]) / 2.0
    assert slope == pytest.approx(tempco, rel=0.02)


@pytest.mark.parametrize("v1, v20, tempco", FITS)
def test_fitted_model_points_and_tempco_numerically(v1, v20, tempco):
    d = led_model_from_forward_voltages(v1, v20, tempco)
    t = 300.15
    # the given points, through the diode law (drc.diode's exact inverse)
    assert float(forward_voltage_at(d, 1e-3, t)) == pytest.approx(v1, abs=1e-9)
    assert float(forward_voltage_at(d, 20e-3, t)) == pytest.approx(v20, abs=1e-9)
    slope = float(forward_voltage_at(d, 1e-3, t + 0.01) - forward_voltage_at(d, 1e-3, t - 0.01)) / 0.02
    # the requested tempco near 1 mA (SPICE2 temperature law, numerical derivative)
    assert slope == pytest.approx(tempco, rel=1e-4)
    assert d.XTI == 3.0 and d.IS > 0 and d.RS >= 0 and d.N > 0


def test_white_led_glimmers_at_2v4_and_glows_at_2v6():
    t = kelvin(27.0)
    at_2v4 = float(solve_string(2.4, 0.0, [[WHITE]], t).current_A[0])
    at_2v6 = float(solve_string(2.6, 0.0, [[WHITE]], t).current_A[0])
    # common practice: a white LED just glimmers near 2.4 V (well under 1 mA)
    assert at_2v4 < 0.3e-3
    # common practice: it glows usefully from about 2.6 V (more than 0.5 mA)
    assert at_2v6 > 0.5e-3


def test_fitted_tempco_is_in_the_trade_range():
    for d in (WHITE, RED):
        t = 300.15
        slope = float(forward_voltage_at(d, 1e-3, t + 1) - forward_voltage_at(d, 1e-3, t - 1)) / 2
        # common practice (domain brief): LED forward voltage falls about 1.5 to 4 mV per degC
        assert -4e-3 <= slope <= -1.5e-3


# --- choosing a series resistor -------------------------------------------------------

def corners(supply_V, temperatures_C):
    v, t = np.meshgrid(np.asarray(supply_V, float), np.asarray(temperatures_C, float) + K0)
    return v.ravel(), t.ravel()


def brute_force(drive, fixed, stages, temperature, low, high, visible, maximum):
    """One solve_string per candidate: the acceptable values, the best one."""
    ok = []
    for r in preferred.values_between(1.0, 1e6, "E24"):
        current = solve_string(drive, fixed + r, stages, temperature).current_A
        if current[low].min() >= visible and current[high].max() <= maximum:
            ok.append(r)
    return ok


@pytest.mark.parametrize("case", ["red on a coin cell", "white on a coin cell", "tight window",
                                  "two in series on a high rail"])
def test_choose_series_resistor_matches_brute_force(case):
    setups = {
        "red on a coin cell": ([2.0, 3.0, 3.3], [[RED]], 0.5e-3, 10e-3, "ok"),
        "white on a coin cell": ([2.0, 3.0, 3.3], [[WHITE]], 0.5e-3, 20e-3, "too-dim"),
        "tight window": ([2.4, 3.6], [[RED]], 5e-3, 6e-3, "no-value-fits"),
        "two in series on a high rail": ([4.5, 5.0, 5.5], [[RED], [AMBER]], 1e-3, 15e-3, "ok"),
    }
    supply, stages, visible, maximum, verdict = setups[case]
    drive, temperature = corners(supply, [-20.0, 27.0, 60.0])
    fixed = np.full(drive.shape, 40.0)                       # a pin's output resistance
    low = np.ones(drive.shape, bool)
    high = drive == drive.max()
    choice = choose_series_resistor(drive, fixed, stages, temperature, low, high, visible, maximum)
    expected = brute_force(drive, fixed, stages, temperature, low, high, visible, maximum)
    # brute force: solve_string once per E24 value (IEC 60063), the same criteria
    assert list(choice.acceptable_ohm) == expected
    assert choice.verdict == verdict
    if expected:
        # most current within the maximum: the smallest acceptable value (current falls with R)
        assert choice.best_ohm == expected[0]
    else:
        assert choice.best_ohm is None


def test_choose_series_resistor_candidates_are_the_e24_decades():
    drive, temperature = corners([3.0], [27.0])
    choice = choose_series_resistor(drive, np.zeros(1), [[RED]], temperature, None, None,
                                    1e-3, 20e-3)
    # IEC 60063 E24 from 1 ohm to 1 Mohm: 6 decades of 24 and the 1 Mohm that closes them
    assert len(choice.candidates_ohm) == 145
    assert choice.candidates_ohm[0] == 1.0 and choice.candidates_ohm[-1] == 1e6
    with pytest.raises(InputError):
        choose_series_resistor(drive, np.zeros(1), [[RED]], temperature, np.array([False]), None,
                               1e-3, 20e-3)
