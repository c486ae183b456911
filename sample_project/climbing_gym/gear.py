"""Gear checks: rope and harness figures in physical units (floats)."""

from refines import refines

LBF_PER_KN = 224.809  # pounds-force per kilonewton (rounded)


@refines(lambda kilonewtons, result: result >= 0.0,
         assuming=lambda kilonewtons: kilonewtons >= 0.0)
def to_pounds_force(kilonewtons: float) -> float:
    """Rated strength for the US-made gauges, which read pounds-force."""
    return kilonewtons * LBF_PER_KN


@refines(lambda wear, result: 0.0 <= result <= 1.0)
def wear_gauge(wear: float) -> float:
    """The share of a rope's rated life used up, held to [0, 1] for the gauge.

    Planted bug for the demo: a faulty sensor reports NaN, and NaN passes
    through the clamp (min(nan, 1.0) is nan, and so is max(nan, 0.0)).
    """
    return max(min(wear, 1.0), 0.0)
