"""Charge pumps through the whole pipeline (netlist + config -> drc's report), checked
against ngspice `.tran ... uic` (the reference simulator, Debian's package) and against
facts of the trade. Circuits are scenarios of our own (tests/netlists/pumps/) and the two
pump samples (samples/).

The ngspice deck is written from the netlist text here, not from drc's own network: each
pin's source gets the pin's output resistance (its [pin] table, else the built-in 40 ohm)
as a resistor and PULSE levels of 0 V and its supply's voltage at the corner; each rail's
DC value is the corner's; resistors and capacitors are scaled by the corner's tolerance;
ngspice runs at the corner's temperature. drc's figures are read per corner from
`design.pumps[k].result` (arrays over every corner).
"""

from __future__ import annotations

import json
import re
import tomllib
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np
import pytest

from ngspice import require_ngspice, tran


ROOT = Path(__file__).resolve().parent.parent
PUMPS = ROOT / "tests" / "netlists" / "pumps"
SAMPLES = ROOT / "samples"
BUILTIN_PIN_OHM = 40.0          # the contract's built-in pin profile

# Tolerances the brief sets for drc against ngspice.
PEAK_TOL = 0.05
CURRENT_TOL = 0.10
SURGE_TOL = 0.10

_SUFFIX = {"t": 1e12, "g": 1e9, "meg": 1e6, "k": 1e3, "mil": 25.4e-6, "m": 1e-3, "u": 1e-6,
           "n": 1e-9, "p": 1e-12, "f": 1e-15}


def spice_number(text: str) -> float:
    """A SPICE number with its suffix (Berkeley SPICE3 user's manual: letters after the
    suffix are ignored; M is milli, MEG mega)."""
    m = re.match(r"^([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)([a-zA-Z]*)", text.strip())
    if m is None:
        raise ValueError(text)
    value, tail = float(m.group(1)), m.group(2).lower()
    for s in ("meg", "mil", "t", "g", "k", "m", "u", "n", "p", "f"):
        if tail.startswith(s):
            return value * _SUFFIX[s]
    return value


def _cards(text: str) -> list[str]:
    """Netlist lines with '+' continuations joined and ';' comments cut (title kept)."""
    out: list[str] = []
    for raw in text.splitlines():
        line = raw.split(";", 1)[0].rstrip() if out else raw
        if line.lstrip().startswith("+") and out:
            out[-1] += " " + line.lstrip()[1:]
        else:
            out.append(line)
    return out


def _load(path: Path):
    """drc's analysis of a netlist with its STEM.toml (the pipeline up to the rules)."""
    from types import SimpleNamespace

    from drc.analysis import analyse
    from drc.context import load_context
    from drc.expand import expand
    context = load_context(path, None)
    return SimpleNamespace(design=analyse(expand(str(path)), context))


def _config(path: Path) -> dict:
    toml = path.with_suffix(".toml")
    return tomllib.loads(toml.read_text()) if toml.exists() else {}


def corner_deck(path: Path, design, i: int, led: str) -> str:
    """The netlist at corner `i` for ngspice, LED current sensed by a 0 V source."""
    config = _config(path)
    corners = design.corners
    pins_by_source = {}
    for label, spec in config.get("pin", {}).items():
        ohm = spec.get("output_resistance")
        pins_by_source[spec["source"].lower()] = (
            spec.get("supply"), spice_number(ohm.split()[0]) if ohm else BUILTIN_PIN_OHM)
    rails = {spec.get("source", label).lower(): label for label, spec in config.get("supply", {}).items()}
    rail_nets = {"0"}
    lines = []
    cards = _cards(path.read_text())
    for k, card in enumerate(cards):
        words = card.split()
        if k == 0 or not words or words[0].startswith("*"):
            lines.append(card if k else "* " + card)
            continue
        name = words[0].lower()
        if name.startswith(".include"):
            # inlined, with junction capacitance set to zero: drc's model leaves it out
            # (pumpmodel's docstring), and with `uic` ngspice starts every junction
            # capacitance empty, which adds a ~1 ns spike (CJO 10 pF through ~80 ohm) to
            # the surge that no pin rating concerns
            library = (path.parent / words[1]).read_text()
            lines.append(re.sub(r"(?i)\bCJO\s*=\s*[^\s)]+", "CJO=0", library))
        elif name in (".op", ".end"):
            continue
        elif name in rails:
            v = float(corners.supply_V[rails[name]][i])
            lines.append(f"{words[0]} {words[1]} {words[2]} DC {v!r}")
            rail_nets.add(words[1].lower())
        elif name in pins_by_source and "pulse" in card.lower():
            supply, ohm = pins_by_source[name]
            v = float(corners.supply_V[supply][i])
            args = re.search(r"(?i)pulse\s*\((.*)\)", card).group(1).split()
            args[:2] = ["0", repr(v)] if spice_number(args[1]) >= spice_number(args[0]) else [repr(v), "0"]
            lines.append(f"{words[0]} {words[1]}_drv {words[2]} PULSE({' '.join(args)})")
            lines.append(f"R{words[0]}_out {words[1]}_drv {words[1]} {ohm!r}")
        elif name in pins_by_source:          # a pin held at a level: DC, at the corner's supply
            supply, ohm = pins_by_source[name]
            level = spice_number(re.search(r"(?i)\bdc\s+(\S+)", card).group(1))
            v = float(corners.supply_V[supply][i]) if level > 0 else 0.0
            lines.append(f"{words[0]} {words[1]}_drv {words[2]} DC {v!r}")
            lines.append(f"R{words[0]}_out {words[1]}_drv {words[1]} {ohm!r}")
        elif name.startswith("r"):
            lines.append(f"{words[0]} {words[1]} {words[2]} "
                         f"{spice_number(words[3]) * float(corners.resistor_factor[i])!r}")
        elif name.startswith("c"):
            if {words[1].lower(), words[2].lower()} <= rail_nets:
                continue        # a bypass capacitor across an ideal source changes nothing
            lines.append(f"{words[0]} {words[1]} {words[2]} "
                         f"{spice_number(words[3]) * float(corners.capacitor_factor[i])!r} IC=0")
        elif name == led.lower():
            lines.append(f"{words[0]} {words[1]} led_sense {' '.join(words[3:])}")
            lines.append(f"Vsense led_sense {words[2]} DC 0")
        else:
            lines.append(card)
    return "\n".join(lines) + "\n.end\n"


def ngspice_figures(deck: str, temperature_C: float, period_s: float, periods: int,
                    output: str, pin_sources: list[str], points: int = 200,
                    visible_A: float | None = None) -> dict:
    """Steady figures over the last period, surge over the first three (as drc defines it:
    the greatest |pin current| in the first three periods from rest), and, given visible_A,
    `visible_s`: when the LED's average over the period before first reaches it (None:
    not within the run)."""
    vectors = [f"v({output})", "i(Vsense)"] + [f"i({s})" for s in pin_sources]
    w = tran(deck, period_s / points, periods * period_s, vectors, uic=True,
             temperature_C=temperature_C, max_step_s=period_s / points)
    t = w["time"]

    def mean(x, k):
        sel = (t >= (periods - k - 1) * period_s - 1e-12) & (t <= (periods - k) * period_s + 1e-12)
        return np.trapezoid(x[sel], t[sel]) / (t[sel][-1] - t[sel][0])

    last = t >= (periods - 1) * period_s - 1e-12
    led = w["i(Vsense)"][last]
    visible_s = None
    if visible_A is not None:
        current = w["i(Vsense)"]
        charge = np.concatenate([[0.0], np.cumsum(0.5 * (current[1:] + current[:-1]) * np.diff(t))])
        window = (charge - np.interp(t - period_s, t, charge, left=0.0)) / period_s
        lit = np.flatnonzero(window >= visible_A)
        visible_s = float(t[lit[0]]) if lit.size else None
    return {"visible_s": visible_s,
            "peak_V": float(w[f"v({output})"][last].max()),
            "ripple_V": float(np.ptp(w[f"v({output})"][last])),
            "modulation_percent": float(100 * np.ptp(led) / max(led.max() + led.min(), 1e-300)),
            "led_A": float(mean(w["i(Vsense)"], 0)),
            "led_before_A": float(mean(w["i(Vsense)"], 1)),
            "surge_A": {s: float(np.abs(w[f"i({s})"][t <= 3 * period_s + 1e-12]).max())
                        for s in pin_sources}}


# every pump netlist of the samples and of tests/netlists/pumps (a test below holds that);
# drc's first pump of each is read
CASES = [
    (SAMPLES / "pump_sensor_1v8.cir"),
    (SAMPLES / "pump_pin_charged.cir"),
    (PUMPS / "doubler_rail.cir"),
    (PUMPS / "doubler_rail_res.cir"),
    (PUMPS / "doubler_rail_reservoir.cir"),      # the reservoir returns to the rail
    (PUMPS / "doubler_pin.cir"),
    (PUMPS / "dickson2.cir"),
    (PUMPS / "dickson3.cir"),
    (PUMPS / "dickson4.cir"),
    (PUMPS / "bootstrap.cir"),
    (PUMPS / "doubler_small_cap.cir"),
    (PUMPS / "twin_doubler_1v8.cir"),
    # the pin lifts the pumping capacitor through a series resistor (pin-overcurrent's fix),
    # and the same with a 0 ohm link in its place (the model once divided by its zero)
    (PUMPS / "doubler_pin_resistor.cir"),
    (PUMPS / "doubler_pin_link.cir"),
    # the lifting pin's net also feeds a load to ground: the model takes it in
    (PUMPS / "doubler_pin_loaded.cir"),
    # a pin whose delay makes its high phase run past the period's end: in the steady state
    # it is high that long every period, and from rest it is low until its delay (drc once
    # cut its high phase at the period's end: LED 2.6 % off; then, wrapped, let it be high
    # at the very start: surge 24 % off)
    (PUMPS / "dickson2_late_phase.cir"),
    # a doubler charged from a pin held high: that pin's surge is a pin's too (drc once left
    # it out of the model's pins: no figure, and no finding for its 52 mA)
    (PUMPS / "doubler_held_pin.cir"),
    # an LED coupled through a capacitor, with a diode restoring the plate: a bootstrap
    (PUMPS / "coupled_restorer.cir"),
    # one pump feeding two LEDs (the second is checked in test_every_led_of_a_pump_...)
    (PUMPS / "doubler_two_leds.cir"),
    # one pin lifting two cells (its surge is one finding: tests/test_pump_rules.py)
    (PUMPS / "one_pin_two_cells.cir"),
    # two cells too small to light the LED (their capacitor fix is checked below)
    (PUMPS / "twin_doubler_small.cir"),
    # two cells whose silicon diodes drop too much (their Schottky fix is checked below)
    (PUMPS / "twin_doubler_silicon.cir"),
    # a rail-fed LED whose anode a pin kicks through a capacitor: a bootstrap whose LED
    # current decays within each phase (the model's graded grid once crossed it: 6 to 8 %)
    (PUMPS / "rail_led_kicked.cir"),
    # pins toggling at 5 Hz: phases of 100 ms, some 350 times the edge's time constant, so
    # the surge, the output's peak and the LED's charge all sit in the first few percent of
    # each phase (the model's step grid once missed them: surge 25 %, peak 15 % short)
    (PUMPS / "doubler_slow_flash.cir"),
]


LONGEST_RUN = 12000     # periods of the longest reference run


def steady_figures(deck: str, temperature_C: float, result, i: int, output: str,
                   pin_sources=(), visible_A: float | None = None) -> dict:
    """ngspice_figures at corner i for twice the periods drc estimates the start-up to take
    (at least 30). The fine run goes to 160 periods; a slow mode (a reservoir that a barely
    lit LED drains) settles in more, and its last two periods agree while it still creeps:
    then the steady figures come from a longer, coarser run (50 points a period, 20 past
    4000 periods: within 1e-6 of 30 points over 6000 periods, measured), the surge from the
    fine one.
    `covered`: the run was as long as wanted."""
    wanted = max(2 * float(result.cycles_to_settle[i]), 30)
    ref = ngspice_figures(deck, temperature_C, result.period_s, int(min(wanted, 160)), output,
                          list(pin_sources), visible_A=visible_A)
    if wanted > 160:
        periods = int(min(wanted, LONGEST_RUN))
        long = ngspice_figures(deck, temperature_C, result.period_s, periods, output, [],
                               points=50 if periods <= 4000 else 20)
        ref.update(peak_V=long["peak_V"], led_A=long["led_A"], led_before_A=long["led_before_A"],
                   ripple_V=long["ripple_V"], modulation_percent=long["modulation_percent"])
    ref["covered"] = wanted <= LONGEST_RUN
    ref["fine"] = wanted <= 160      # the steady figures at 200 points a period
    return ref


def test_every_pump_netlist_is_compared():
    pump_netlists = {p.name for p in PUMPS.glob("*.cir")} | {
        p.name for p in SAMPLES.glob("*.cir") if _load(p).design.pumps}
    assert pump_netlists == {p.name for p in CASES}


def _compare(path: Path) -> list[dict]:
    fr = _load(path)
    design = fr.design
    pump = design.pumps[0]
    r = pump.result
    assert r is not None, f"{path.name}: drc did not solve its pump"
    led = pump.region.leds[0].name
    corners = design.corners
    load = r.load_average_A
    picks = {"nominal": corners.nominal, "low": int(np.argmin(load)), "high": int(np.argmax(load))}
    rows = []
    for tag, i in picks.items():
        deck = corner_deck(path, design, i, led)
        sources = [design.pins[p].source for p in pump.pins]
        ref = steady_figures(deck, float(corners.temperature_C[i]), r, i, pump.output_net, sources,
                             visible_A=pump.region.leds[0].visible_current_A)
        row = r.corner_index[i] if getattr(r, "corner_index", None) is not None else i
        wave = r.diode_current_A[led][row]
        rows.append({"case": path.stem, "corner": tag, "index": i, "where": corners.words(i),
                     "period_s": float(r.period_s),
                     "drc_peak_V": float(r.peak_V[i]), "drc_led_A": float(load[i]),
                     "drc_ripple_V": float(r.ripple_V[i]),
                     "drc_visible_s": float(r.time_to_visible_s[i]),
                     "drc_modulation_percent": float(100 * np.ptp(wave) / max(wave.max() + wave.min(), 1e-300)),
                     "drc_surge_A": {design.pins[p].source: float(r.startup_surge_A[p][i]) for p in pump.pins},
                     **ref})
    return rows


@pytest.fixture(scope="module")
def comparisons():
    require_ngspice()
    with ThreadPoolExecutor(max_workers=4) as pool:
        return [row for rows in pool.map(_compare, CASES) for row in rows]


def _deviation(a, b):
    return abs(a - b) / abs(b)


def test_reference_run_is_settled(comparisons):
    """The ngspice run is long enough: twice the periods drc estimates its start-up to take
    (the last two periods agreeing is not enough where the state creeps), and its last two
    periods' LED averages agree to 1 %."""
    for row in comparisons:
        assert row["covered"], row
        assert _deviation(row["led_A"], row["led_before_A"]) < 0.01, row


def test_peak_voltage_against_ngspice(comparisons):
    """pumps[].peak_V within 5 % of ngspice's greatest output voltage over a steady period."""
    worst = max(comparisons, key=lambda r: _deviation(r["drc_peak_V"], r["peak_V"]))
    for row in comparisons:
        assert _deviation(row["drc_peak_V"], row["peak_V"]) < PEAK_TOL, row
    print("largest peak deviation", _deviation(worst["drc_peak_V"], worst["peak_V"]), worst["case"], worst["corner"])


def test_led_average_current_against_ngspice(comparisons):
    """The LED's average current over a steady period within 10 % of ngspice's."""
    for row in comparisons:
        assert _deviation(row["drc_led_A"], row["led_A"]) < CURRENT_TOL, row


def test_time_to_visible_against_ngspice(comparisons):
    """The time from the pins' first edge until the LED's average over a period reaches its
    visible current, against the same from ngspice's run from rest, where that run shows
    it: within 35 %. The check simulates the start-up in full for three periods, then
    carries it on with the period map linearised at the steady state: that estimate came
    out between 28 % early (dickson2, which lights after some 19 periods) and 33 % late
    (twin_doubler_silicon at its high corner) when this test was written. 20 periods in
    full brought the cases tried within 2 %, at 2.8 times the time per pump (112 ms for
    bench/pump_speed.py's doubler, against its 50 ms target). A corner lit within two
    periods is left out: the two measure the first period differently."""
    timed = [r for r in comparisons if r["visible_s"] is not None and np.isfinite(r["drc_visible_s"])
             and r["visible_s"] > 2 * r["period_s"]]
    assert len(timed) >= 30
    for r in timed:
        assert _deviation(r["drc_visible_s"], r["visible_s"]) <= 0.35, r


def test_ripple_and_led_modulation_against_ngspice(comparisons):
    """The output's ripple (peak to trough over the steady period) within 10 % of ngspice's
    and the LED's modulation (as IEEE 1789 defines it, on its current) within 2 points,
    wherever ngspice's reference ran at its fine resolution (a coarse long run misses the
    peaks). Both once came out of a PULSE high phase cut at the period's end, which left
    the pins of pump_sensor_1v8 both low for 5 ns: a 1.3 V ripple (ngspice: 64 mV) and
    100 % modulation (ngspice: 15 %)."""
    fine = [r for r in comparisons if r["fine"]]
    assert len(fine) >= 40
    for r in fine:
        assert _deviation(r["drc_ripple_V"], r["ripple_V"]) <= 0.10, r
        assert abs(r["drc_modulation_percent"] - r["modulation_percent"]) <= 2.0, r


# A pin whose PULSE high phase (delay + rise + width + fall) runs past the end of its period
# (here by 15 ns: the width is exactly half a period and the edges are 10 ns) must still be
# low at the start: a PULSE source holds its first level until its delay (SPICE3 manual,
# PULSE), and ngspice's start-up has it low. These cases once failed; they stay as checks.
WRAPPED_HIGH_PHASE = {"pump_pin_charged", "doubler_pin"}


@pytest.mark.parametrize("case", [p.stem for p in CASES])
def test_startup_surge_against_ngspice(comparisons, case):
    """Each lifting pin's start-up surge (greatest |current|, first three periods from rest)
    within 10 % of ngspice's with every capacitor empty (uic, IC=0)."""
    rows = [r for r in comparisons if r["case"] == case]
    assert len(rows) == 3
    for row in rows:
        for source, surge in row["drc_surge_A"].items():
            assert _deviation(surge, row["surge_A"][source]) < SURGE_TOL, (source, row)


def test_corners_differ(comparisons):
    """The three corners compared per circuit are really different operating points."""
    for case in {r["case"] for r in comparisons}:
        rows = [r for r in comparisons if r["case"] == case]
        assert len({r["index"] for r in rows}) == 3, rows
        currents = sorted(r["led_A"] for r in rows)
        assert currents[0] < currents[-1] * 0.95, rows


def test_print_deviation_table(comparisons, capsys):
    """Not a check: the largest deviation per quantity and corner, for the record."""
    table = {}
    for row in comparisons:
        for q, d in (("peak_V", _deviation(row["drc_peak_V"], row["peak_V"])),
                     ("led_A", _deviation(row["drc_led_A"], row["led_A"])),
                     ("surge_A" + ("(wrapped phase)" if row["case"] in WRAPPED_HIGH_PHASE else ""),
                      max(_deviation(v, row["surge_A"][s]) for s, v in row["drc_surge_A"].items()))):
            key = (q, row["corner"])
            if d > table.get(key, (0.0, ""))[0]:
                table[key] = (d, row["case"])
    with capsys.disabled():
        for (q, c), (d, case) in sorted(table.items()):
            print(f"\n  {q:8s} {c:8s} {100 * d:6.2f} %  ({case})", end="")
        print()
    assert table


# ---------------------------------------------------------------------------------------
# topology recognition, through the command line's JSON (the contract's report shape)


def _report(path: Path) -> dict:
    """The report's "pumps" and "branches" entries as the engine writes them (through
    JSON, so the shapes are what `--format json` prints); rules are not needed here."""
    from drc.engine import _branch_json, _pump_json
    design = _load(path).design
    report = {"pumps": [_pump_json(p, design) for p in design.pumps],
              "branches": [e for b in design.branches for e in _branch_json(b, design)]}
    return json.loads(json.dumps(report, default=float))


@pytest.fixture(scope="module")
def reports():
    names = ["doubler_rail", "doubler_rail_res", "doubler_pin", "dickson2", "dickson3",
             "dickson4", "bootstrap", "doubler_slow_flash", "doubler_pin_resistor",
             "doubler_rail_reservoir"]
    with ThreadPoolExecutor(max_workers=4) as pool:
        return dict(zip(names, pool.map(lambda n: _report(PUMPS / f"{n}.cir"), names)))


# (netlist, topology, stages, elements in ladder order, output net) - the contract's definitions:
# a doubler is one pumping capacitor, a charge diode and a transfer diode; a dickson ladder has
# `stages` pumping capacitors on two opposite phases (Dickson 1976).
TOPOLOGIES = [
    ("doubler_rail", "doubler", 1, ["DCH", "CP", "DTR"], "out"),
    ("doubler_rail_res", "doubler", 1, ["DCH", "CP", "DTR", "CR"], "out"),
    ("doubler_pin", "doubler", 1, ["DCH", "CP", "DTR", "CR"], "out"),
    ("doubler_slow_flash", "doubler", 1, ["DCH", "CP", "DTR", "CR"], "out"),
    ("doubler_pin_resistor", "doubler", 1, ["DCH", "CP", "DTR", "RCK"], "out"),
    ("doubler_rail_reservoir", "doubler", 1, ["DCH", "CP", "DTR", "CR"], "out"),
    ("dickson2", "dickson", 2, ["D1", "C1", "D2", "C2", "D3", "CR"], "out"),
    ("dickson3", "dickson", 3, ["D1", "C1", "D2", "C2", "D3", "C3", "D4", "CR"], "out"),
    ("dickson4", "dickson", 4, ["D1", "C1", "D2", "C2", "D3", "C3", "D4", "C4", "D5", "CR"], "out"),
]


@pytest.mark.parametrize("name,topology,stages,elements,output", TOPOLOGIES)
def test_topology(reports, name, topology, stages, elements, output):
    report = reports[name]
    assert len(report["pumps"]) == 1
    pump = report["pumps"][0]
    assert (pump["topology"], pump["stages"], pump["output_net"]) == (topology, stages, output)
    assert pump["elements"] == elements
    assert pump["id"] == elements[1]
    for key in ("peak_V", "average_V"):
        v = pump[key]
        assert set(v) == {"low", "nominal", "high"}
        assert v["low"] <= v["nominal"] <= v["high"]
    # peak at least the average, at the nominal corner
    assert pump["peak_V"]["nominal"] >= pump["average_V"]["nominal"]
    [branch] = report["branches"]
    assert branch["drive"] == "pump" and branch["source"] == pump["id"]


def test_doubler_charged_from_a_pin_lists_both_pins(reports):
    assert set(reports["doubler_pin"]["pumps"][0]["pins"]) == {"PA", "PB"}
    assert reports["doubler_rail"]["pumps"][0]["pins"] == ["CK"]


def test_dickson_output_grows_with_stages(reports):
    """Dickson (IEEE JSSC 11(3), 1976): each stage adds about Vphi - Vd, here 1.2 - 0.3 V; our
    ladders have heavier loads as they grow, so only the rise of the peak is checked (> 0.3 V
    per stage, well under the ideal 0.9 V)."""
    peaks = [reports[f"dickson{n}"]["pumps"][0]["peak_V"]["nominal"] for n in (2, 3, 4)]
    assert peaks[1] - peaks[0] > 0.3 and peaks[2] - peaks[1] > 0.3


def test_bootstrap_recognised(reports):
    pump = reports["bootstrap"]["pumps"][0]
    assert pump["topology"] == "bootstrap" and pump["stages"] == 1 and pump["id"] == "CB"
    assert reports["bootstrap"]["branches"][0]["drive"] == "pump"


def test_bootstrap_output_is_the_lifted_node(reports):
    pump = reports["bootstrap"]["pumps"][0]
    assert pump["output_net"] == "x"
    assert "DL" not in pump["elements"]
    # the lifted node rises above the 2.0 V rail when the pin goes high
    assert pump["peak_V"]["nominal"] > 2.0


def test_every_led_of_a_pump_is_reported_and_matches_ngspice():
    """A doubler feeding two white LEDs with their own resistors (47 and 150 ohm): both are
    branches with drive pump (drc once kept only the first, as the model's load, and dropped
    the other with a note), and each one's average current agrees with ngspice .tran (uic)
    within 10 % (the issue's tolerance) at the nominal corner and the corners where the
    first LED's current is least and greatest."""
    require_ngspice()
    path = PUMPS / "doubler_two_leds.cir"
    design = _load(path).design
    [branch] = [b for b in design.branches if b.drive == "pump"]
    assert [led.name for led in branch.leds] == ["DL1", "DL2"]
    [pump] = design.pumps
    r, corners = pump.result, design.corners
    first = branch.current_A["DL1"]
    picks = {corners.nominal, int(np.argmin(first)), int(np.argmax(first))}
    for name in ("DL1", "DL2"):
        for i in sorted(picks):
            ref = steady_figures(corner_deck(path, design, i, name), float(corners.temperature_C[i]),
                                 r, i, pump.output_net)
            assert _deviation(float(branch.current_A[name][i]), ref["led_A"]) <= 0.10, (name, i)
    # the 150 ohm LED gets less than the 47 ohm one, at every corner
    assert (branch.current_A["DL2"] < branch.current_A["DL1"]).all()
    report = _report(path)
    assert [b["led"] for b in report["branches"]] == ["DL1", "DL2"]


def _fixed_led_in_ngspice(tmp_path, original: Path, text: str, led: str,
                          libraries: dict[str, str]) -> float:
    """ngspice .tran (uic) of `text`, the netlist `original` with a fix made in it (its
    config beside it, `libraries` written at their relative paths): the LED's average
    current at the corner where drc finds `led` least lit in `original`, the low corner
    the fix speaks of."""
    for name, library in libraries.items():
        (tmp_path / name).parent.mkdir(parents=True, exist_ok=True)
        (tmp_path / name).write_text(library)
    fixed = tmp_path / original.name
    fixed.write_text(text)
    (tmp_path / original.with_suffix(".toml").name).write_text(original.with_suffix(".toml").read_text())
    design = _load(fixed).design
    low = int(np.argmin(_load(original).design.branches[0].current_A[led]))
    pump = design.pumps[0]
    r = pump.result
    return steady_figures(corner_deck(fixed, design, low, led), float(design.corners.temperature_C[low]),
                          r, low, pump.output_net)["led_A"]


def test_surge_fixes_of_two_pins_state_their_cost_together(tmp_path):
    """pump_sensor_1v8: each pin's surge fix (an E24 resistor) states its cost alone and,
    as both pins need one, their cost together. That figure against ngspice .tran (uic) of
    the sample with both resistors in, at the low corner it names: within 10 % (the issue's
    tolerance for the LED's average current)."""
    require_ngspice()
    from drc.engine import run_check
    sample = SAMPLES / "pump_sensor_1v8.cir"
    report, _, _ = run_check([str(sample)], None, [])
    surges = [f for f in report["findings"] if f["rule"] == "pin-overcurrent" and "surge" in f["message"]]
    assert len(surges) == 2
    ohms = []
    for f in surges:
        m = re.search(r"add (\d+) Ω \(E24.*made together, DLED gets ([\d.]+) µA at the low corner",
                      f["fix"])
        assert m, f["fix"]
        ohms.append(m.group(1))
        together_A = float(m.group(2)) * 1e-6
    text = sample.read_text().replace("CPA pa xa 10u", f"RSA pa pra {ohms[0]}\nCPA pra xa 10u") \
        .replace("CPB pb xb 10u", f"RSB pb prb {ohms[1]}\nCPB prb xb 10u")
    reference = _fixed_led_in_ngspice(tmp_path, sample, text, "DLED", {
        "models/indicators.lib": (SAMPLES / "models" / "indicators.lib").read_text()})
    assert _deviation(together_A, reference) <= 0.10, (together_A, reference)
    # and far from what one resistor alone leaves (the fix's first figure)
    alone_A = float(re.search(r"to ([\d.]+) µA\)", surges[0]["fix"]).group(1)) * 1e-6
    assert _deviation(alone_A, reference) > 0.10



def test_surge_fix_states_its_cost_to_every_led_of_the_pump(tmp_path):
    """doubler_two_leds: the pin's surge fix (an E24 resistor) costs both LEDs the pump
    feeds, and says what each keeps at its own low corner. The second LED's figure against
    ngspice .tran (uic) of the netlist with the resistor in: within 10 % (the issue's
    tolerance for an LED's average current)."""
    require_ngspice()
    from drc.engine import run_check
    original = PUMPS / "doubler_two_leds.cir"
    report, _, _ = run_check([str(original)], None, [])
    [f] = [f for f in report["findings"] if f["rule"] == "pin-overcurrent" and "surge" in f["message"]]
    m = re.search(r"add (\d+) Ω \(E24.* DL1 \d+ % \([\d.]+ µA to [\d.]+ µA\) and DL2 \d+ % "
                  r"\([\d.]+ µA to ([\d.]+) µA\) of their average currents", f["fix"].replace("\n", " "))
    assert m, f["fix"]
    stated_A = float(m.group(2)) * 1e-6
    text = original.read_text().replace("CP ck x 22u", f"RSF ck pr {m.group(1)}\nCP pr x 22u")
    reference = _fixed_led_in_ngspice(tmp_path, original, text, "DL2",
                                      {"parts.lib": (PUMPS / "parts.lib").read_text()})
    assert _deviation(stated_A, reference) <= 0.10, (stated_A, reference)

def test_capacitor_fix_of_two_cells_changes_both(tmp_path):
    """twin_doubler_small: two doubler cells of 100 nF fall short of 0.3 mA. The fix names
    one value for the cells' pumping capacitors (it once scaled the first cell's alone, and
    asked for 330 nF); with both at that value, ngspice .tran (uic) at the low corner the
    fix names gives the LED its visible current, and drc's figure within 10 %."""
    require_ngspice()
    from drc.engine import run_check
    path = PUMPS / "twin_doubler_small.cir"
    report, _, _ = run_check([str(path)], None, [])
    [f] = [f for f in report["findings"] if f["rule"] == "boost-inadequate"]
    m = re.search(r"a (\d+) nF pumping capacitor \(E6, IEC 60063\) in place of 100 nF gives "
                  r"([\d.]+) µA at the low corner", f["fix"])
    assert m, f["fix"]
    value, stated_A = m.group(1), float(m.group(2)) * 1e-6
    reference = _fixed_led_in_ngspice(tmp_path, path, path.read_text().replace("0.1u", f"{value}n"),
                                      "DL", {"parts.lib": (PUMPS / "parts.lib").read_text()})
    assert reference >= 0.3e-3, reference
    assert _deviation(stated_A, reference) <= 0.10


def test_schottky_fix_of_two_cells_changes_all_four_diodes(tmp_path):
    """twin_doubler_silicon: two silicon-diode doubler cells on 1.8 V leave the white LED
    dark at the low corner. The fix names every charge and transfer diode of both cells
    (it once named the first cell's two alone); with all four replaced by the part it
    describes (drc.advice.SCHOTTKY_SUGGESTION's parameters), ngspice .tran (uic) at the
    low corner lights the LED, and drc's figure is within 10 %."""
    require_ngspice()
    from drc.advice import SCHOTTKY_SUGGESTION
    from drc.engine import run_check
    path = PUMPS / "twin_doubler_silicon.cir"
    report, _, _ = run_check([str(path)], None, [])
    [f] = [f for f in report["findings"] if f["rule"] == "boost-inadequate"]
    m = re.search(r"Schottky diodes \(about 0.3 V at 1 mA\) for (.*) give ([\d.]+) µA at the low corner",
                  f["fix"].replace("\n", " "))
    assert m, f["fix"]
    assert sorted(m.group(1).split(", ")) == ["DCA", "DCB", "DTA", "DTB"]
    stated_A = float(m.group(2)) * 1e-6
    p = SCHOTTKY_SUGGESTION
    model = (f".model SUGGESTED D(IS={p['IS']!r} N={p['N']!r} RS={p['RS']!r} "
             f"XTI={p['XTI']!r} EG={p['EG']!r})")
    text = re.sub(r"(?m)^(D[CT][AB] \S+ \S+) SIL$", r"\1 SUGGESTED", path.read_text())
    assert text.count("SUGGESTED") == 4
    reference = _fixed_led_in_ngspice(tmp_path, path, text, "DL",
                                      {"parts.lib": (PUMPS / "parts.lib").read_text() + model + "\n"})
    assert reference >= 0.3e-3, reference
    assert _deviation(stated_A, reference) <= 0.10, (stated_A, reference)


def _random_doubler(rng, k: int) -> tuple[str, str]:
    """A doubler of random parts (rail, frequency, duty, capacitors, diodes, resistors, a
    pin or the rail charging it, a pin resistor or none, a reservoir or none): its netlist
    and its design context."""
    vdd = rng.choice([1.2, 1.5, 1.8, 2.4, 3.0])
    period = 1.0 / rng.choice([50, 500, 1000, 2000, 4000, 10000])
    duty = rng.choice([0.5, 0.5, 0.3, 0.7])
    diode = rng.choice(["SBD", "SBD", "SIL"])
    lines = [f"random doubler {k}", ".include parts.lib", f"VDD vdd 0 DC {vdd}",
             f"VPB pb 0 PULSE(0 {vdd} 0 10n 10n {duty * period:.6g} {period:.6g})"]
    config = [f'[supply.VDD]\nsource = "VDD"\nrange = ["{vdd * 0.95:.3g} V", "{vdd * 1.05:.3g} V"]',
              '[pin.PB]\nsource = "VPB"\nsupply = "VDD"']
    charge_from = "vdd"
    if rng.random() < 0.3:
        lines.append(f"VPA pa 0 PULSE(0 {vdd} {duty * period:.6g} 10n 10n {(1 - duty) * period:.6g} "
                     f"{period:.6g})")
        config.append('[pin.PA]\nsource = "VPA"\nsupply = "VDD"')
        charge_from = "pa"
    lift = "pb"
    pin_resistor = rng.choice([None, None, "10", "47", "150"])
    if pin_resistor:
        lines.append(f"RS pb lb {pin_resistor}")
        lift = "lb"
    lines += [f"DCH {charge_from} x {diode}", f"CP {lift} x {rng.choice(['0.1u', '0.47u', '1u', '4.7u', '10u', '22u'])}",
              f"DTR x out {diode}"]
    return _with_load(rng, lines, config, [None, "1u", "4.7u"], ["10", "47", "100", "330", "1k"])


def _with_load(rng, lines, config, reservoirs, resistors, visible: str | None = None):
    """A random pump's netlist and design context, finished: a reservoir on `out` drawn
    from `reservoirs` (None: none), the white LED DL and its resistor from `resistors`."""
    reservoir = rng.choice(reservoirs)
    if reservoir:
        lines.append(f"CR out 0 {reservoir}")
    lines += ["DL out lk WLED", f"RL lk 0 {rng.choice(resistors)}", ".end"]
    config.append('[led.DL]\nelement = "DL"\ncolour = "white"\n'
                  + (f'visible_current = "{visible}"\n' if visible else "")
                  + '[ambient]\ntemperature = ["-20 degC", "60 degC"]')
    return "\n".join(lines) + "\n", "\n\n".join(config) + "\n"


def _random_pumps(tmp_path, make, seed: int, count: int):
    """(netlist, path, analysed design) for `count` pumps that make(rng, k) draws, seeded,
    each written with its design context beside the test parts library."""
    import random
    rng = random.Random(seed)
    (tmp_path / "parts.lib").write_text((PUMPS / "parts.lib").read_text())
    for k in range(count):
        netlist, config = make(rng, k)
        path = tmp_path / f"random_{k}.cir"
        path.write_text(netlist)
        path.with_suffix(".toml").write_text(config)
        yield netlist, path, _load(path).design


def test_random_doublers_against_ngspice(tmp_path):
    """Doublers of random parts (seeded, the same every run), each at its nominal corner,
    against ngspice .tran (uic): the LED's average within 10 % and the output's peak within
    5 % (the issue's tolerances), where the LED carries at least 1 uA and ngspice settles
    within LONGEST_RUN periods (a dark pump's output creeps for hundreds of thousands of
    periods). Such a set
    found the model stopping short of the steady state where a reservoir drains slowly."""
    require_ngspice()
    compared = 0
    for netlist, path, design in _random_pumps(tmp_path, _random_doubler, 20261204, 10):
        [pump] = design.pumps
        r, i = pump.result, design.corners.nominal
        if r.load_average_A[i] < 1e-6:
            continue
        ref = steady_figures(corner_deck(path, design, i, "DL"), float(design.corners.temperature_C[i]),
                             r, i, pump.output_net)
        if not ref["covered"]:
            continue                # ngspice would need more than LONGEST_RUN periods
        assert _deviation(float(r.load_average_A[i]), ref["led_A"]) < CURRENT_TOL, (netlist, ref)
        assert _deviation(float(r.peak_V[i]), ref["peak_V"]) < PEAK_TOL, (netlist, ref)
        compared += 1
    assert compared >= 6



def _random_dickson(rng, k: int) -> tuple[str, str]:
    """A Dickson ladder of random parts (rail, frequency, 2 to 4 stages on opposite pins,
    capacitors per stage, diodes, a reservoir or none, the LED's resistor)."""
    vdd = rng.choice([1.2, 1.5, 1.8, 2.4, 3.0])
    period = 1.0 / rng.choice([200, 1000, 2000, 4000, 10000])
    stages = rng.choice([2, 2, 3, 4])
    diode = rng.choice(["SBD", "SBD", "SIL"])
    half = period / 2
    lines = [f"random dickson {k}", ".include parts.lib", f"VDD vdd 0 DC {vdd}",
             f"VPA pa 0 PULSE(0 {vdd} 0 10n 10n {half:.6g} {period:.6g})",
             f"VPB pb 0 PULSE(0 {vdd} {half:.6g} 10n 10n {half:.6g} {period:.6g})"]
    config = [f'[supply.VDD]\nsource = "VDD"\nrange = ["{vdd * 0.95:.3g} V", "{vdd * 1.05:.3g} V"]',
              '[pin.PA]\nsource = "VPA"\nsupply = "VDD"', '[pin.PB]\nsource = "VPB"\nsupply = "VDD"']
    cap = rng.choice(["0.47u", "1u", "4.7u", "10u"])
    previous = "vdd"
    for s in range(1, stages + 1):
        lines.append(f"D{s} {previous} n{s} {diode}")
        value = cap if rng.random() < 0.7 else rng.choice(["1u", "2.2u", "4.7u"])
        lines.append(f"C{s} {'pa' if s % 2 else 'pb'} n{s} {value}")
        previous = f"n{s}"
    lines.append(f"D{stages + 1} {previous} out {diode}")
    return _with_load(rng, lines, config, [None, "1u", "4.7u", "10u"],
                      ["47", "100", "330", "1k", "3.3k"], visible="0.2 mA")


def _random_bootstrap(rng, k: int) -> tuple[str, str]:
    """A bootstrap of random parts: a pin lifts a capacitor that a resistor recharges from
    the rail, with the LED on the lifted node (rail, frequency, duty, parts)."""
    vdd = rng.choice([1.8, 2.0, 2.4, 3.0])
    period = 1.0 / rng.choice([200, 1000, 2000, 4000])
    duty = rng.choice([0.5, 0.3, 0.7])
    lines = [f"random bootstrap {k}", ".include parts.lib", f"VDD vdd 0 DC {vdd}",
             f"VCK ck 0 PULSE(0 {vdd} 0 10n 10n {duty * period:.6g} {period:.6g})",
             f"RCH vdd x {rng.choice(['47', '100', '220', '470', '1k'])}",
             f"CB ck x {rng.choice(['0.47u', '1u', '4.7u', '10u'])}",
             "DL x lk WLED", f"RL lk 0 {rng.choice(['10', '33', '100', '330'])}", ".end"]
    config = [f'[supply.VDD]\nsource = "VDD"\nrange = ["{vdd * 0.95:.3g} V", "{vdd * 1.05:.3g} V"]',
              '[pin.CK]\nsource = "VCK"\nsupply = "VDD"',
              '[led.DL]\nelement = "DL"\ncolour = "white"\nvisible_current = "0.2 mA"\n'
              '[ambient]\ntemperature = ["-20 degC", "60 degC"]']
    return "\n".join(lines) + "\n", "\n\n".join(config) + "\n"


@pytest.mark.parametrize("make, topology, seed", [(_random_dickson, "dickson", 20261205),
                                                  (_random_bootstrap, "bootstrap", 20261206)])
def test_random_ladders_and_bootstraps_against_ngspice(tmp_path, make, topology, seed):
    """Dickson ladders and bootstraps of random parts (seeded), each at its nominal corner
    and at the corner where drc finds the LED dimmest, against ngspice .tran (uic): the LED's
    average within 10 % and the output's peak within 5 % (the issue's tolerances). When
    written: the LED within 0.78 % on the ladders and 2.2 % on the bootstraps (one at
    12 uA), the peak within 1.0 %."""
    require_ngspice()
    compared = 0
    for netlist, path, design in _random_pumps(tmp_path, make, seed, 6):
        [pump] = design.pumps
        assert pump.topology == topology, netlist
        r = pump.result
        for i in sorted({design.corners.nominal, int(np.argmin(r.load_average_A))}):
            if r.load_average_A[i] < 1e-6:
                continue
            ref = steady_figures(corner_deck(path, design, i, "DL"),
                                 float(design.corners.temperature_C[i]), r, i, pump.output_net)
            if not ref["covered"]:
                continue
            assert _deviation(float(r.load_average_A[i]), ref["led_A"]) < CURRENT_TOL, (netlist, i, ref)
            assert _deviation(float(r.peak_V[i]), ref["peak_V"]) < PEAK_TOL, (netlist, i, ref)
            compared += 1
    assert compared >= 8

# ---------------------------------------------------------------------------------------
# facts of the trade (common practice, no citable source; loose tolerances)


def test_two_pin_schottky_pump_on_1v8():
    """Common practice: a two-pin Schottky pump on 1.8 V charges its capacitor to about
    1.5 V (1.8 V less a ~0.3 V Schottky), feeds the LED roughly 2.8 V on average, and the
    lifted node peaks at 3.1 to 3.2 V. Tolerances: +-0.15 V, +-0.25 V, 3.0..3.3 V."""
    design = _load(PUMPS / "twin_doubler_1v8.cir").design
    i = design.corners.nominal
    assert len(design.pumps) == 2 and {p.topology for p in design.pumps} == {"doubler"}
    r = design.pumps[0].result
    row = r.corner_index[i]
    charged = (r.waveform_V["xa"][row] - r.waveform_V["pa"][row]).max()
    assert abs(charged - 1.5) < 0.15
    assert abs(float(r.average_V[i]) - 2.8) < 0.25
    assert 3.0 <= r.waveform_V["xa"][row].max() <= 3.3
