"""Totalizer arithmetic: mass and energy integrated pass by pass. Pure.

Each pass brings the flow's mass rate and energy rate with their quality at a time ``now``.
The interval since the previous pass is counted with the trapezoid rule when both ends are
usable (good or uncertain); when either end is bad, or there was no previous pass, or the
interval is longer than ``max_gap`` (the monitor was down, the loop stalled), the interval
goes to ``not_measured`` seconds and adds nothing to the totals. Energy is counted only
when both ends also have an energy rate (the reference enthalpy may be bad while the mass
flow is good): every interval it misses, those included, goes to ``energy_not_measured``.
Time counted on uncertain figures is added to the totals and also to ``uncertain``
seconds, so a reader can see how much of a total the standard does not cover. A reset
zeroes the totals and keeps the time of the reset.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

__all__ = ["Totals", "accumulate", "reset"]


@dataclass(frozen=True, slots=True)
class Totals:
    """Running totals of one flow (SI) and the last pass they were brought up to."""

    mass: float = 0.0  # kg
    energy: float = 0.0  # J
    not_measured: float = 0.0  # s counted apart: flow bad or not watched
    energy_not_measured: float = 0.0  # s the energy total missed (includes not_measured)
    uncertain: float = 0.0  # s counted in the totals on uncertain figures
    since: float | None = None  # time of the last reset (or the first pass)
    last_time: float | None = None  # time of the last pass
    last_mass_flow: float | None = None  # kg/s at the last pass; None when it was bad
    last_energy_rate: float | None = None  # W at the last pass; None when bad or no reference
    last_uncertain: bool = False


def accumulate(
    totals: Totals,
    now: float,
    mass_flow: float | None,
    energy_rate: float | None,
    *,
    uncertain: bool = False,
    max_gap: float,
) -> Totals:
    """Totals brought up to ``now`` with this pass's rates (None: bad)."""
    if totals.last_time is None:
        since = totals.since if totals.since is not None else now
        return replace(
            totals,
            since=since,
            last_time=now,
            last_mass_flow=mass_flow,
            last_energy_rate=energy_rate,
            last_uncertain=uncertain,
        )
    dt = now - totals.last_time
    if dt <= 0.0:
        return totals  # a repeated or earlier clock reading adds nothing
    mass, energy = totals.mass, totals.energy
    not_measured, unsure = totals.not_measured, totals.uncertain
    energy_missed = totals.energy_not_measured
    prev_m = totals.last_mass_flow
    if dt > max_gap or prev_m is None or mass_flow is None:
        not_measured += dt
        energy_missed += dt
    else:
        mass += 0.5 * (prev_m + mass_flow) * dt
        prev_e = totals.last_energy_rate
        if prev_e is not None and energy_rate is not None:
            energy += 0.5 * (prev_e + energy_rate) * dt
        else:
            energy_missed += dt
        if uncertain or totals.last_uncertain:
            unsure += dt
    return Totals(
        mass=mass,
        energy=energy,
        not_measured=not_measured,
        energy_not_measured=energy_missed,
        uncertain=unsure,
        since=totals.since,
        last_time=now,
        last_mass_flow=mass_flow,
        last_energy_rate=energy_rate,
        last_uncertain=uncertain,
    )


def reset(totals: Totals, now: float) -> Totals:
    """Totals zeroed at ``now``; the next pass counts from here with the current rate."""
    return Totals(
        since=now,
        last_time=now,
        last_mass_flow=totals.last_mass_flow,
        last_energy_rate=totals.last_energy_rate,
        last_uncertain=totals.last_uncertain,
    )
