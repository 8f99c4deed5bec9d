"""drc.advice.rerun_pump_variants: several pump fixes in one run of the periodic model, held
to rerun_pump one variant at a time (the periodic model itself is held to ngspice in
tests/test_pumpmodel.py and tests/test_speed_pump.py).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from drc import advice
from drc.analysis import analyse
from drc.context import load_context
from drc.expand import expand

SAMPLES = Path(__file__).resolve().parent.parent / "samples"


def _design(name):
    path = SAMPLES / name
    return analyse(expand(str(path)), load_context(path, None, rule_ids=None))


@pytest.fixture(scope="module")
def pumped():
    """samples/pump_sensor_1v8.cir: a doubler on a 1.8 V rail (a scenario of our own)."""
    design = _design("pump_sensor_1v8.cir")
    pump = next(p for p in design.pumps if p.result is not None)
    return design, pump


def test_one_variant_is_exactly_rerun_pump(pumped):
    design, pump = pumped
    change = {"capacitor_scale": {c.key: 2.2 for c in pump.capacitors}}
    alone = advice.rerun_pump(design, pump, **change)
    [batched] = advice.rerun_pump_variants(design, pump, [change])
    assert np.array_equal(alone.load_average_A, batched.load_average_A)


def test_each_variant_gets_what_it_gets_alone(pumped):
    design, pump = pumped
    pin = pump.region.pins[0].label
    variants = [{"capacitor_scale": {c.key: s for c in pump.capacitors}} for s in (1.5, 2.2, 4.7)]
    variants.append({"series_ohm": {pin: 56.0}})
    batched = advice.rerun_pump_variants(design, pump, variants)
    assert len(batched) == len(variants)
    for change, together in zip(variants, batched):
        alone = advice.rerun_pump(design, pump, **change)
        # the model's stop tests look at the whole batch: last digits only
        np.testing.assert_allclose(together.load_average_A, alone.load_average_A, rtol=1e-6)
        np.testing.assert_allclose(together.startup_surge_A[pin], alone.startup_surge_A[pin],
                                   rtol=1e-6)
        assert together.load_average_A.shape == (design.corners.count,)


def test_variants_refuse_what_cannot_differ_within_one_run(pumped):
    design, pump = pumped
    with pytest.raises(ValueError):
        advice.rerun_pump_variants(design, pump, [{"frequency_scale": 0.5}, {}])
    assert advice.rerun_pump_variants(design, pump, []) == []


def test_a_pin_resistor_in_the_batch_lowers_the_surge(pumped):
    """Capacitor charging law: an empty capacitor first draws about (V - Vd) / R through the
    loop, so 56 ohm more on the pin lowers the start-up surge at every corner."""
    design, pump = pumped
    pin = pump.region.pins[0].label
    bare, resisted = advice.rerun_pump_variants(design, pump, [{"series_ohm": {pin: 0.0}},
                                                               {"series_ohm": {pin: 56.0}}])
    assert (resisted.startup_surge_A[pin] < bare.startup_surge_A[pin]).all()


def test_a_batch_leaves_the_region_signature_alone(pumped):
    """The region's signature keys the fixes' memos: a batch of corners must not replace it."""
    design, pump = pumped
    before = pump.region.signature
    advice.rerun_pump_variants(design, pump, [{}, {}])
    advice.rerun_pump_variants(design, pump, [{"series_ohm": {pump.region.pins[0].label: 10.0}},
                                              {}])
    assert pump.region.signature == before
