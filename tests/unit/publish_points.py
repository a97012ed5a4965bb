"""Point states for the publishing tests: plain values, no I/O."""

from __future__ import annotations

from edge.model import GOOD, PointState, Quality, Reading, bad


def point(
    name: str = "drum",
    *,
    p: float | None = 1_101_325.0,
    t: float | None = 460.0,
    quality: Quality = GOOD,
    hint: str | None = None,
) -> PointState:
    """A superheated point with pressure (Pa), temperature, tsat and superheat (K)."""
    q = quality if p is not None else bad("comm_loss")
    readings = {
        "pressure": Reading(p, q, "Pa"),
        "temperature": Reading(t, q if t is not None else bad("comm_loss"), "K"),
        "tsat": Reading(457.0 if p is not None else None, q, "K"),
        "superheat": Reading(None if t is None or p is None else t - 457.0, q, "K"),
    }
    return PointState(name=name, state="superheated", readings=readings, quality=q, hint=hint)
