"""Every bad input gets a ScheduleError naming the parameter, the value and what is allowed."""

from __future__ import annotations

import math

import pytest

from schedwidget import (ScheduleError, cosine, drops, exp_decay, flat, from_spec, inv_sqrt, knots, one_cycle, poly,
                         ramp, restarts, stages, triangle, warmup)


def test_is_value_error():
    assert issubclass(ScheduleError, ValueError)


@pytest.mark.parametrize("make,pattern", [
    (lambda: cosine(0.1, steps=-5), r"cosine: steps must be a whole number >= 1, got -5"),
    (lambda: cosine(0.1, steps=2.5), r"cosine: steps must be a whole number >= 1, got 2.5"),
    (lambda: cosine(0.1, steps=0), r"got 0 \(a shape needs at least one tick; use flat\(\) for a constant rate\)"),
    (lambda: cosine(0.1, steps=True), r"steps must be a whole number >= 1, got True"),
    (lambda: flat(math.nan), r"flat: lr must be a finite rate >= 0, got nan"),
    (lambda: flat(math.inf), r"flat: lr must be a finite rate >= 0, got inf"),
    (lambda: ramp(-0.1, 1.0, 10), r"ramp: start must be a finite rate >= 0, got -0.1"),
    (lambda: exp_decay(0.1, 1.5), r"exp_decay: factor must be a finite number in \(0, 1\], got 1.5"),
    (lambda: exp_decay(0.1, 0.0), r"exp_decay: factor must be a finite number in \(0, 1\], got 0.0"),
    (lambda: drops(0.1, at=(10,), factor=2.0), r"drops: factor must be a finite number in \(0, 1\], got 2.0"),
    (lambda: cosine(0.1, floor=0.2, steps=10), r"cosine: floor must be <= peak = 0.1, got 0.2"),
    (lambda: poly(0.1, floor=0.5, steps=10), r"poly: floor must be <= peak = 0.1, got 0.5"),
    (lambda: warmup(cosine(0.1, steps=100), steps=500),
     r"warmup: steps must be <= 100 \(the length of the schedule it leads into\), got 500"),
    (lambda: stages(flat(0.1), cosine(0.1, steps=10)), r"stages: parts\[0\] must be a stage with a length"),
    (lambda: knots([(0, 0.1), (20, 0.2), (10, 0.3)]), r"knots: points\[2\] tick must be a tick > 20"),
    (lambda: knots([(0, 0.1), (10, 0.2), (10, 0.3)]), r"knots: points\[2\] tick must be a tick > 10"),
    (lambda: knots([(5, 0.1), (10, 0.2)]), r"knots: points\[0\] tick must be 0"),
    (lambda: knots([(0, 0.1), (10, 0.0)], interp="log"),
     r"knots: points\[1\] rate must be a rate > 0 with interp='log', got 0.0 \(log interpolation cannot pass"),
    (lambda: restarts(flat(0.1)), r"restarts: target must be a schedule with a length"),
    (lambda: restarts(cosine(0.1, steps=10), cycles=0), r"restarts: cycles must be a whole number >= 1 or None"),
    (lambda: drops(0.1, at=(30, 20)), r"drops: at\[1\] must be a tick > at\[0\] = 30, got 20"),
    (lambda: drops(0.1, at=(30,), steps=30), r"drops: at must be ticks < steps = 30"),
    (lambda: inv_sqrt(0.1, warmup=100, steps=50), r"inv_sqrt: warmup must be <= steps = 50"),
    (lambda: triangle(0.2, 0.1, half_period=5), r"triangle: low must be <= high = 0.1"),
    (lambda: one_cycle(0.1, steps=100, low=0.2), r"one_cycle: low must be <= peak = 0.1"),
    (lambda: ramp(0.0, 1.0, 10, curve="geometric"), r"ramp: start must be a rate > 0 with curve='geometric'"),
    (lambda: ramp(0.1, 1.0, 10, curve="exp"), r"ramp: curve must be one of 'linear', 'geometric', 'cosine'"),
    (lambda: cosine(0.1, steps=10).clip(), r"clip: low must be a rate when high is None"),
    (lambda: cosine(0.1, steps=10)(-1), r"cosine: t must be a tick >= 0, got -1"),
    (lambda: cosine(0.1, steps=10)(1.5), r"cosine: t must be a whole number of ticks"),
    (lambda: flat(0.1).stretch(10), r"stretch: target must be a schedule with a length"),
])
def test_constructor_messages(make, pattern):
    with pytest.raises(ScheduleError, match=pattern):
        make()


@pytest.mark.parametrize("spec,pattern", [
    ({"version": 2, "schedule": {"kind": "flat", "lr": 0.1}},
     r"spec: version must be <= 1, got 2 \(this file was written by a newer schedwidget"),
    ({"version": 1, "schedule": {"kind": "spiral", "lr": 0.1}}, r"spec: schedule.kind: 'spiral' is not one of"),
    ({"version": 1, "schedule": {"kind": "cosine", "peak": "0.1", "steps": 10}},
     r"schedule.peak: '0.1' is not of type 'number'"),
    ({"version": 1, "schedule": {"kind": "cosine", "peak": 0.1, "steps": 10, "gamma": 0.5}},
     r"Additional properties are not allowed \('gamma' was unexpected\)"),
    ({"version": 1, "schedule": {"kind": "stages", "parts": [{"kind": "flat", "lr": 0.1},
                                                           {"kind": "exp_decay", "peak": 0.1, "factor": 3}]}},
     r"schedule.parts\[1\].factor: 3 is greater than the maximum of 1.0"),
    ({"version": 1, "schedule": {"kind": "stages", "parts": [{"kind": "flat", "lr": 0.1},
                                                           {"kind": "flat", "lr": 0.1}]}},
     r"spec: schedule: stages: parts\[0\] must be a stage with a length"),
    ({"version": 1, "schedule": {"kind": "warmup", "steps": 9,
                                 "target": {"kind": "cosine", "peak": 0.1, "floor": 0.3, "steps": 10}}},
     r"spec: schedule.target: cosine: floor must be <= peak"),
    ([1, 2], r"spec: the top level must be a JSON object, got list"),
    ({"schedule": {"kind": "flat", "lr": 0.1}}, r"'version' is a required property"),
])
def test_spec_messages(spec, pattern):
    with pytest.raises(ScheduleError, match=pattern):
        from_spec(spec)


def test_spec_shows_at_most_three_problems():
    spec = {"version": 1, "schedule": {"kind": "stages", "parts": [
        {"kind": "cosine", "peak": -1, "steps": 0, "floor": "x"}, {"kind": "flat", "lr": -2}]}}
    with pytest.raises(ScheduleError, match=r"\(\+1 more\)") as info:
        from_spec(spec)
    assert str(info.value).count(": ") >= 3


@pytest.mark.parametrize("make,pattern", [
    (lambda: cosine(0.1, steps=10**400), r"cosine: steps must be a whole number <= 2\*\*53"),
    (lambda: cosine(0.1, steps=10)(10**20), r"cosine: t must be a tick <= 2\*\*53"),
    (lambda: drops(0.1, at=(10**17,)), r"drops: at\[0\] must be a whole number >= 1 and <= 2\*\*53"),
    (lambda: knots([(0, 0.1), (10**17, 0.2)]), r"knots: points\[1\] tick must be a whole number >= 0 and <= 2\*\*53"),
    (lambda: restarts(cosine(1.0, steps=1000), cycles=40, growth=3.0), r"restarts: cycles must be few enough"),
    (lambda: restarts(cosine(1.0, steps=100), growth=1 - 1e-9), r"restarts: growth must be 1.0, or at least 0.01"),
    (lambda: restarts(cosine(1.0, steps=100), growth=0.3), r"restarts: growth must be a finite number in \[0.5, 10\]"),
    (lambda: one_cycle(1.0, steps=100, tail=1e-17), r"one_cycle: tail must be at least 0.01"),
    (lambda: warmup(cosine(0.1, steps=10), 3, curve="geometric"), r"warmup: start must be a rate > 0 with curve='geometric'"),
])
def test_limits(make, pattern):
    # review findings: huge ticks, runaway cycle tables, a tail that vanishes in rounding, blame the right call
    with pytest.raises(ScheduleError, match=pattern):
        make()


def test_deep_spec_is_refused_cleanly():
    node = {"kind": "flat", "lr": 0.1, "steps": 3}
    for _ in range(200):
        node = {"kind": "scale", "target": node, "factor": 1.0}
    with pytest.raises(ScheduleError, match=r"spec: nesting must be at most 48 schedules deep"):
        from_spec({"version": 1, "schedule": node})


def test_spec_steps_per_epoch_checked():
    from schedwidget import to_spec
    with pytest.raises(ScheduleError, match=r"to_spec: steps_per_epoch must be a whole number >= 1 or None, got 0"):
        to_spec(flat(0.1), steps_per_epoch=0)
