"""Steam and water flow from the monitor's readings: ISO 5167 primary elements (orifice,
ISA 1932 and long radius nozzles, classical Venturi), compensation of flow signals, energy
rate, boiler efficiency and totalizer arithmetic. Pure: no I/O, no clock.

``iso5167`` (discharge coefficients, expansibility, limits of use, the Reynolds iteration),
``viscosity`` (IAPWS R12-08), ``materials`` (thermal expansion of pipe and bore),
``fluid`` (the state of the fluid at a point, wet steam judged), ``compensation``,
``energy``, ``totalizer``, and ``meters`` (configured flows compiled and evaluated).
"""

from __future__ import annotations

from edge.flow.fluid import FluidState, fluid_state, wet_steam
from edge.flow.iso5167 import Element, FlowResult, Limit, solve
from edge.flow.materials import EXPANSION
from edge.flow.meters import (
    ELEMENT_METERS,
    METERS,
    SIGNAL_METERS,
    FlowSpec,
    FlowState,
    compile_flows,
    evaluate,
    finite,
    step_totals,
)
from edge.flow.totalizer import Totals, accumulate, reset
from edge.flow.viscosity import viscosity

__all__ = [
    "ELEMENT_METERS",
    "EXPANSION",
    "METERS",
    "SIGNAL_METERS",
    "Element",
    "FlowResult",
    "FlowSpec",
    "FlowState",
    "FluidState",
    "Limit",
    "Totals",
    "accumulate",
    "compile_flows",
    "evaluate",
    "finite",
    "fluid_state",
    "reset",
    "solve",
    "step_totals",
    "viscosity",
    "wet_steam",
]
