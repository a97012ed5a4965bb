"""Point figures from one TagStore snapshot. Pure.

``spec`` compiles point specs; ``fast`` runs the evaluation pass (the common case inline,
``general`` for every other case); ``phase`` judges the measured phase against the
configured one and which properties can be vouched for; ``hints`` judges, over a window of
samples, which configuration mistake explains a saturated point that disagrees with the
steam tables; ``build`` makes the returned objects fast; ``advice`` holds the
config-time warnings ``check`` prints. Imports run one way, by full module name: ``spec``,
``phase`` and ``build`` import no other derive module; ``general`` imports those three,
``hints`` imports ``spec``, and ``fast`` imports them all; nothing imports this face.

Readings (SI, keyed by ``edge.model.POINT_QUANTITIES``):

* ``pressure`` absolute Pa: the tag value itself (``absolute``), value + barometer
  (``gauge``) or barometer - value (``vacuum``);
* ``temperature`` K; ``tsat`` K (IF97 equation 31 at the absolute pressure);
* ``superheat`` K = temperature - tsat (negative: subcooled);
* ``deviation`` K = |superheat|, on saturated points only;
* ``enthalpy`` J/kg, ``entropy`` J/(kg K), ``density`` kg/m3 (only with ``properties=True``),
  as the phase judgement says (``edge.derive.phase``): saturated vapour at p on a saturated
  point, the single-phase state at (p, T) on a superheated or subcooled point that is
  clearly on its side of Tsat, the saturated state of the configured phase (uncertain)
  within the band, bad (``wet_steam``/``flashing``) on the wrong side, and the
  supercritical state above 22.064 MPa. Never the other phase's properties as good.

Quality: each reading carries the worst quality of the inputs it depends on (pressure
sample, barometer when the reference is gauge or vacuum, temperature sample); the point's
quality is the worst of all its inputs and of the phase judgement. A missing tag is
``bad`` / ``no_data``; a pressure below the triple point or above 100 MPa makes tsat,
everything after it and the point ``bad`` / ``outside_if97``; a temperature above
2273.15 K or at 0 K is ``bad`` / ``out_of_range``. With ``properties=False`` the three
property keys are left out; a quantity that does not apply (deviation off a saturated
point, temperature on a point without a temperature tag) is a ``bad`` reading with reason
``not_applicable`` or ``config``.
"""

from __future__ import annotations

from edge.derive.fast import BAROMETER_BAD, add_properties, evaluate, step
from edge.derive.general import NOT_APPLICABLE, TWO_PHASE
from edge.derive.hints import EMPTY_WINDOW, Evidence, Window
from edge.derive.phase import FLASHING, NEAR, OFF_SATURATION, WET_STEAM
from edge.derive.spec import REFERENCES, PointSpec, compile_points

__all__ = [
    "BAROMETER_BAD",
    "EMPTY_WINDOW",
    "FLASHING",
    "NEAR",
    "NOT_APPLICABLE",
    "OFF_SATURATION",
    "REFERENCES",
    "TWO_PHASE",
    "WET_STEAM",
    "Evidence",
    "PointSpec",
    "Window",
    "add_properties",
    "compile_points",
    "evaluate",
    "step",
]
