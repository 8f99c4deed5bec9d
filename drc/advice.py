"""Helpers the rules share, published through drc.api: where a value is worst, what a corner
is in words, what series resistor would do, and which cautions a branch carries."""

from __future__ import annotations

import numpy as np

from drc import preferred
from drc.analysis import Branch, Design, Led, diode_params
from drc.diode import voltage_at_current
from drc.errors import InputError
from drc.flicker import modulation_percent
from drc.solve import SeriesResistorChoice, series_verdict, solve_string
from drc.memo import Memo
from drc.api import format_quantity

CHOICES = Memo()
ROW_CURRENTS = Memo(limit=16384)    # rows of 146 currents: at most some 19 MB

# The candidates series_resistor_advice weighs: choose_series_resistor's defaults.
_SERIES, _LOWEST_OHM, _HIGHEST_OHM = "E24", 1.0, 1e6


def _choose(corners, drive, extra_ohm: float, stages, visible_A, max_A, *, drive_key: bytes = b"",
            stages_id=None) -> SeriesResistorChoice:
    """What choose_series_resistor(drive, extra_ohm, stages, temperature, None, None,
    visible_A, max_A, candidate_factor=resistor_factor) gives, on the corners that bound the
    branch: the distinct combinations of drive, temperature and tolerance (np.unique's
    sorted rows), worked out once per distinct branch.

    The key holds everything the choice depends on: the corner set (its serial stands for
    its temperatures and resistor factors, fixed for its life), the drive at every corner,
    the resistance outside the branch, the diodes' parameters, and the two currents.
    drive_key, if given, is drive.tobytes() already made (a Phase's, shared by the strings
    on one pair of nets, so its hash is worked out once); stages_id is _stage_id(stages)."""
    drive = np.asarray(drive, float)
    key = (corners.serial, drive.shape, drive_key or drive.tobytes(), extra_ohm,
           _stage_id(stages) if stages_id is None else stages_id, visible_A, max_A)
    known = CHOICES.get(key)
    if known is None:
        stages_key = tuple(tuple(s) for s in stages)
        if not (visible_A > 0 and max_A > 0):
            raise InputError(None, "visible and maximum currents must be positive")
        fixed = np.full(corners.count, extra_ohm)
        temperature_K = np.asarray(corners.temperature_K, float)
        factor = np.asarray(corners.resistor_factor, float)
        table = np.stack([drive, fixed, temperature_K, factor], axis=1)
        _, sel = np.unique(table, axis=0, return_index=True)
        rows = table[sel]
        current = _candidate_currents(stages, stages_key, rows[_bounding(rows)])
        known = _verdict(current, visible_A, max_A)
        CHOICES.put(key, known)
    return known


_STAGE_IDS: dict = {}      # a string's diode parameters, stage by stage -> a small number


def _stage_id(stages) -> int:
    """A number for the string's diodes (equal parameters, equal numbers): a key that
    costs no hashing of the parameters once a branch has it (see _stages)."""
    content = tuple(tuple(s) for s in stages)
    found = _STAGE_IDS.get(content)
    if found is None:
        found = _STAGE_IDS[content] = len(_STAGE_IDS)
    return found


def _bounding(rows: np.ndarray) -> np.ndarray:
    """Which rows (drive V, fixed ohm, temperature K, resistor factor) can hold a
    candidate's least or greatest current: the verdict reads only those two.

    The current through a string of diodes and a resistance rises with the drive voltage
    and falls with the resistance (each element's voltage rises with its current), and a
    candidate's resistance is the fixed ohms plus its value times the row's factor. So at
    one temperature and fixed resistance, a row with no more drive and no less factor than
    another, and one of them strictly, carries less current at every candidate: it is
    never the greatest, and the other never the least. The rows kept are those that nothing
    bounds from below, and those that nothing bounds from above (at most two per
    temperature on a full grid of corners)."""
    drive, fixed, temperature, factor = (rows[:, c] for c in range(4))
    alike = (temperature[:, None] == temperature[None, :]) & (fixed[:, None] == fixed[None, :])
    # below[i, j]: row j carries less current than row i at every candidate
    strict = (drive[None, :] < drive[:, None]) | (factor[None, :] > factor[:, None])
    below = alike & (drive[None, :] <= drive[:, None]) & (factor[None, :] >= factor[:, None]) & strict
    # a row with something below it is not a least; with something above (below.T), not a greatest
    return ~below.any(axis=1) | ~below.any(axis=0)


def _candidate_currents(stages, stages_key, rows: np.ndarray) -> np.ndarray:
    """The string's current at each row (drive V, fixed ohm, temperature K, resistor factor)
    with nothing added (column 0) and with each candidate added, scaled by the row's factor:
    the (rows x 1 + candidates) table choose_series_resistor solves.

    Branches on other rails share most of their corners (the same temperatures and
    tolerances, and often the same drive), so each row is solved once per set of diodes and
    remembered. solve_string solves every element on its own (its Newton iteration moves
    each element until that element converges), so a row's currents are the same whatever
    rows it is solved with."""
    keys = [(stages_key, row.tobytes()) for row in rows]
    known = [ROW_CURRENTS.get(k) for k in keys]
    missing = [k for k, found in enumerate(known) if found is None]
    if missing:
        added = np.concatenate(([0.0], preferred.values_between(_LOWEST_OHM, _HIGHEST_OHM, _SERIES)))
        v, r, t, factor = (rows[missing, c] for c in range(4))
        sol = solve_string(v[:, None], r[:, None] + added[None, :] * factor[:, None], stages,
                           t[:, None])
        for k, currents in zip(missing, sol.current_A):
            known[k] = currents
            ROW_CURRENTS.put(keys[k], currents)
    return np.stack(known)


def _verdict(current: np.ndarray, visible_current_A: float, max_current_A: float):
    """choose_series_resistor's verdict from its table of currents, every corner both a low
    and a high one."""
    candidates = preferred.values_between(_LOWEST_OHM, _HIGHEST_OHM, _SERIES)
    return series_verdict(current.min(axis=0), current.max(axis=0), candidates,
                          visible_current_A, max_current_A, _SERIES)

LITHIUM_CAUTION = ("Lithium cells shorted or reversed can overheat, vent or burn: protect the "
                   "battery path and follow the cell maker's datasheet.")
EYE_CAUTION = ("Infrared, ultraviolet and high-brightness LEDs have eye-safety limits (IEC 62471); "
               "blue and white parts carry a blue-light hazard at high brightness (indicator parts "
               "are usually in the exempt group): the datasheet's risk group and the standard govern.")


def worst_low(values: np.ndarray) -> int:
    """The corner index where a per-corner value is least."""
    if isinstance(values, np.ndarray):        # the method: np.argmin's dispatch costs more
        return int(values.argmin())
    return int(np.argmin(values))


def worst_high(values: np.ndarray) -> int:
    """The corner index where a per-corner value is greatest."""
    if isinstance(values, np.ndarray):
        return int(values.argmax())
    return int(np.argmax(values))


_DESCRIBED: dict = {}          # (corner set's serial, index) -> Corners.describe(index)


def corner(design: Design, index: int) -> dict:
    """A corner as the report gives it: {"supply_V": {...}, "temperature_C": ...}.

    Each finding gets a dict of its own; the description is worked out once per corner of
    a corner set (its serial is unique in the process, and a Corners is fixed for its life)."""
    corners = design.corners
    serial = getattr(corners, "serial", None)
    if serial is None:
        return corners.describe(index)
    key = (serial, int(index))
    found = _DESCRIBED.get(key)
    if found is None:
        found = corners.describe(index)
        if len(_DESCRIBED) < 65536:
            _DESCRIBED[key] = found
    return {k: dict(v) if isinstance(v, dict) else v for k, v in found.items()}


def corner_words(design: Design, index: int) -> str:
    return design.corners.words(index)


def branch_cautions(design: Design, branch: Branch) -> str:
    """The cautions that apply to a branch: lithium-fed, eye safety."""
    parts = []
    supply = branch.supply
    if supply is None:
        pin = branch.pin or branch.sink_pin
        if pin is not None and pin.supply in design.supplies:
            supply = design.supplies[pin.supply]
    if supply is not None and supply.lithium:
        parts.append(LITHIUM_CAUTION)
    if any(l.eye_safety for l in branch.leds):
        parts.append(EYE_CAUTION)
    return " ".join(parts)


def _stages_and_id(design: Design, branch: Branch):
    """(the branch's stages as diode parameters, a list per stage; _stage_id of them).
    Worked out once per branch and kept on it (a design is read-only once analysed); the
    rules ask for it once per finding, and several rules about one branch."""
    kept = branch.__dict__.get("_stage_params")
    if kept is not None and kept[0] is design.flat:       # (the flat design: no cycle)
        return kept[1]
    led_params = {l.element.key: l.params for l in branch.leds}
    stages = [[led_params[d.key] if d.key in led_params else diode_params(design.flat, d) for d in st]
              for st in branch.stages]
    found = (stages, _stage_id(stages))
    branch.__dict__["_stage_params"] = (design.flat, found)
    return found


_DROPS: dict = {}        # (each stage's first diode and size, current, temperature) -> volts


def _string_drop(stages, current_A: float, t: float, stages_id=None) -> float:
    """The diodes' share of needed_voltage: each stage's forward voltage at its share of
    `current_A`, summed in order. Repeated cells ask for the same few, so each distinct
    one is worked out once (a positive current: -0.0 and 0.0 would share a key).
    stages_id is _stage_id(stages), if known."""
    key = (_stage_id(stages) if stages_id is None else stages_id, current_A, t)
    found = _DROPS.get(key) if current_A > 0 else None
    if found is None:
        found = 0.0
        for stage in stages:
            found += float(voltage_at_current(stage[0], current_A / len(stage), t))
        if current_A > 0 and len(_DROPS) < 65536:
            _DROPS[key] = found
    return found


def needed_voltage(design: Design, branch: Branch, current_A: float, index: int) -> float:
    """The drive voltage the string needs to carry `current_A` at corner `index`."""
    t = float(design.corners.temperature_K[index])
    stages, stages_id = _stages_and_id(design, branch)
    total = _string_drop(stages, current_A, t, stages_id)
    # branch.on_drive()'s resistance at this one corner (it adds the two at every corner)
    resistance = branch.series_resistance_ohm[index] + branch.phases[branch.lit_phase].extra_resistance_ohm
    return total + current_A * float(resistance)


def series_resistor_advice(design: Design, branch: Branch, led: Led, goal: str = "both") -> str:
    """The E24 series resistor (IEC 60063) that keeps `led` visible at every corner and under
    its maximum at every corner, computed; or a plain statement that none can, and what would.

    A string solved as a network with what else its pin drives (Branch.pin_loads) gets the
    advice worked out for the string alone, and says so: such a load only lowers the drive
    the string sees (a pull-down on a sourcing pin, a pull-up on a sinking one), so a value
    kept under the maximum stays under it, and visibility is to be checked again."""
    if branch.network is not None and branch.pin_loads and branch.string_alone is not None:
        import copy
        view = copy.copy(branch)
        view.network, (view.stages, view.phases) = None, branch.string_alone
        nominal = design.corners.nominal
        view.lit_phase = max(range(len(view.phases)), key=lambda k: float(view.phases[k].drive_V[nominal]))
        pins = sorted({p.label for p in branch.network_pins})
        return (series_resistor_advice(design, view, led, goal) +
                f" (worked out for the string alone: what else {' and '.join(pins)} "
                f"drive{'s' if len(pins) == 1 else ''}, {', '.join(x.name for x in branch.pin_loads)}, "
                "lowers its drive; check again with the new value)")
    if branch.network is not None or not branch.phases or not branch.stages:
        return ("its circuit is not a plain string: adjust the resistors around "
                f"{led.name} and check again")
    phase = branch.phases[branch.lit_phase]
    share = max(phase.share, 1e-9)
    drive = phase.drive_V
    stages, stages_id = _stages_and_id(design, branch)
    drive_key = phase.drive_key if type(drive) is np.ndarray and drive.dtype == np.float64 else b""
    choice = _choose(design.corners, drive, phase.extra_resistance_ohm, stages,
                     led.visible_current_A / share, led.max_current_A, drive_key=drive_key,
                     stages_id=stages_id)
    have = ", ".join(f"{r.name} {preferred.format_resistance(r.value)}" for r in branch.resistors) or "no resistor"
    if choice.verdict == "ok":
        low = choice.acceptable_ohm[0]
        high = choice.acceptable_ohm[-1]
        return (f"use {preferred.format_resistance(choice.best_ohm)} (E24, IEC 60063) in place of {have}: "
                f"it keeps {led.name} above {format_quantity(led.visible_current_A, 'A')} at every corner and "
                f"under {format_quantity(led.max_current_A, 'A')}; any E24 value from "
                f"{preferred.format_resistance(low)} to {preferred.format_resistance(high)} does")
    if choice.verdict == "too-dim" and goal == "max":
        cap = _choose(design.corners, drive, phase.extra_resistance_ohm, stages,
                      1e-12, led.max_current_A, drive_key=drive_key, stages_id=stages_id)
        if cap.acceptable_ohm:
            return (f"use at least {preferred.format_resistance(cap.acceptable_ohm[0])} (E24, IEC 60063) "
                    f"in place of {have} to stay under {format_quantity(led.max_current_A, 'A')} at the high "
                    f"corner; no value does that and also keeps it visible at the low corner "
                    f"(see led-headroom)")
    if choice.verdict == "too-dim":
        best = choice.zero_added_low_current_A * share
        lift = needed_voltage(design, branch, led.visible_current_A / share, worst_low(drive))
        return (f"no series resistor can: even with none, {led.name} gets {format_quantity(best, 'A')} at the "
                f"low corner; lift it with a charge pump, choose a lower-voltage colour (red or amber "
                f"drop about 1.8 V at 1 mA), or feed it from a regulated rail of at least {lift:.2f} V")
    if choice.verdict == "too-bright":
        return (f"even {preferred.format_resistance(choice.candidates_ohm[-1])} lets too much through: "
                "the drive is far above what the LED needs; use a lower rail")
    return (f"no single E24 value keeps {led.name} visible at the low corner and under its maximum "
            "at the high corner: the corners spread its current too widely; a regulated rail or a "
            "constant-current drive would")


def rerun_pump(design: Design, pump, steady: bool = False, **changes):
    """The pump's model result with changes (series_ohm={pin: ohm}, capacitor_scale={key: x},
    diode_override={key: DiodeParams}), at every corner; the start-up in its quick form.

    The search for the changed pump's steady state starts from the pump's own (asked for
    no change, the full result is the pump's own, from the analysis). steady=True: the
    steady state alone (about a third of the time); the start-up figures (surge, time to
    visible) are NaN."""
    from drc.pumps import solve_on_own_corners
    return solve_on_own_corners(pump.region, design.corners,
                                lambda e: diode_params(design.flat, e), steady=steady,
                                warm=bool(changes), **changes)


def rerun_pump_variants(design: Design, pump, variants: list[dict], steady: bool = False) -> list:
    """rerun_pump(design, pump, **v) for each v of `variants`, in ONE run of the model.

    Each variant may change series_ohm={pin: ohm} and capacitor_scale={key: x} (values that
    the model takes per corner); a frequency or a diode cannot differ within one run. The
    region's own corners (as solve_on_own_corners picks them) are laid out once per variant,
    side by side, with each variant's values at its own block of corners, and each variant's
    result is its block spread back over every corner (its waveforms stay in the batch).

    The model's Newton and shooting stop tests look at the whole batch, so a variant's
    figures can differ from its own rerun_pump in the last digits (some 1e-9 relative on the
    boards measured); a single variant gives exactly rerun_pump's result. steady as for
    rerun_pump."""
    from drc.pumps import expand_result, simulate, steady_start
    allowed = {"series_ohm", "capacitor_scale"}
    for v in variants:
        if set(v) - allowed:
            raise ValueError(f"a batched re-run can vary only {sorted(allowed)}")
    region = pump.region
    corners = design.corners
    # the same corner choice as drc.pumps.solve_on_own_corners
    labels = {r.label for r in region.rails} | {p.supply for p in region.pins if p.supply}
    sel, inverse = corners.reduce(sorted(labels), capacitors=True)
    count, size = len(variants), len(sel)
    if count == 0:
        return []
    if count == 1:
        return [rerun_pump(design, pump, steady=steady, **variants[0])]
    laid = np.tile(sel, count)

    def per_corner(field: str, default: float) -> dict:
        """name -> each variant's value (`default` where it names none), at its corners."""
        names = sorted({name for v in variants for name in v.get(field, {})})
        return {name: np.repeat([float(v.get(field, {}).get(name, default)) for v in variants],
                                size)
                for name in names}

    changes = {}
    series, scale = per_corner("series_ohm", 0.0), per_corner("capacitor_scale", 1.0)
    if series:
        changes["series_ohm"] = series
    if scale:
        changes["capacitor_scale"] = scale
    if not changes:        # every variant is the pump as it is (and drc.pumps.simulate would
        return [rerun_pump(design, pump, steady=steady)] * count   # take a batch of it for the region's own)
    start = steady_start(region, sel)
    start = np.tile(start, (count, 1)) if start is not None else None
    result = simulate(region, corners.subset(laid), lambda e: diode_params(design.flat, e),
                      fast=True, sel=laid, start_x=start, steady_only=steady, **changes)
    return [expand_result(result, inverse + k * size) for k in range(count)]


# A small Schottky for fixes that suggest one (from memory: about 0.3 V at 1 mA).
SCHOTTKY_SUGGESTION = dict(IS=2e-7, N=1.05, RS=2.0, XTI=2.0, EG=0.69)


def schottky_params():
    from drc.diode import DiodeParams
    return DiodeParams(**SCHOTTKY_SUGGESTION)


def flicker_of_branch(design: Design, branch: Branch, led: Led):
    """(frequency Hz, modulation percent) of an LED's light, or None when it is steady."""
    if branch.drive == "pump" and branch.pump_region is not None and branch.pump_region.result is not None:
        r = branch.pump_region.result
        pins = [p for p in branch.pump_region.pins if p.drive == "toggle"]
        if not pins:
            return None
        row = getattr(r, "corner_index", None)
        wave = r.diode_current_A[led.name][row[design.corners.nominal] if row is not None
                                           else design.corners.nominal]
        return pins[0].frequency_Hz, modulation_percent(wave)
    pins = branch.toggling_pins()
    if not pins or not branch.phases:
        return None
    n = design.corners.nominal
    lit = branch.peak_current_A.get(led.name)
    average = branch.current_A.get(led.name)
    if lit is None or average is None or lit[n] <= 0:
        return None
    share = branch.phases[branch.lit_phase].share
    # a square drive: lit for `share` of the period at the lit current, else at the rest
    rest = (average[n] - share * lit[n]) / max(1 - share, 1e-12) if share < 1 else lit[n]
    return pins[0].frequency_Hz, modulation_percent([lit[n], max(rest, 0.0)])


# ---------------------------------------------------------------------------- for rules (drc.api)

def diode_params_of(design: Design, element):
    """A diode element's SPICE parameters (IS, N, RS, XTI, EG, TNOM_C, BV, IBV; SI) from its
    .model, SPICE's defaults where it gives none; an LED's are `led.params`."""
    return diode_params(design.flat, element)


def forward_voltage(params, current_A, temperature_K):
    """The forward voltage (V) that carries `current_A` at `temperature_K`, by the SPICE diode
    law with RS; arrays in, arrays out."""
    return voltage_at_current(params, current_A, temperature_K)


def saturation_current_at(params, temperature_K):
    """The diode's saturation current IS (A) at `temperature_K` (SPICE2 temperature law):
    about its reverse leakage below breakdown."""
    from drc.diode import saturation_current
    return saturation_current(params, temperature_K)


def nearest_preferred(value: float, series: str = "E24") -> float:
    """The value of an IEC 60063 series ("E6" to "E192") nearest `value` in ratio."""
    return preferred.nearest(value, series)


def is_preferred(value: float, series: str = "E24", rel: float = 1e-6) -> bool:
    """Whether `value` (> 0) is a value of an IEC 60063 series, within `rel` of it."""
    if value is None or not value > 0:
        return False
    near = preferred.nearest(value, series)
    return abs(near - value) <= rel * near


def is_schottky(design: Design, element) -> bool:
    """A diode that drops under 0.45 V at 1 mA at the nominal temperature (a Schottky)."""
    params = diode_params(design.flat, element)
    t = float(design.corners.temperature_K[design.corners.nominal])
    return float(voltage_at_current(params, 1e-3, t)) < 0.45
