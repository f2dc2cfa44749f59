"""Physical constants and named default tolerances; all values SI.

No other module hard-codes a tolerance: each is named here with the reason for its value.
"""

from __future__ import annotations

import math

#: Vacuum permeability (H/m). The 2019 SI value is 1.25663706212e-6 H/m; the classical
#: 4*pi*1e-7 differs from it by about 5.5e-10 relative, far below any tolerance here.
#: We keep the exact classical value so that closed-form checks read cleanly.
MU0: float = 4.0e-7 * math.pi

#: mu0 / (4 pi), the prefactor of the Biot-Savart law and of Neumann's formula (H/m).
MU0_OVER_4PI: float = 1.0e-7

#: Default largest chord sagitta as a fraction of a coil's size (bounding-box diagonal).
#: On a circle of radius R (diagonal 2*sqrt(2)*R) 2e-4 gives about 94 chords at level 0;
#: with Richardson extrapolation over three levels this reaches ~1e-7 relative inductance
#: error on smooth windings.
DEFAULT_SAGITTA_FRACTION: float = 2.0e-4

#: Default largest turning angle between consecutive chords (rad). Keeps tight bends
#: of small radius from being cut too coarsely when the sagitta rule alone would allow it.
DEFAULT_MAX_ANGLE: float = math.radians(10.0)

#: Hard cap on the number of straight segments one coil may be cut into; protects
#: against a tolerance typed in the wrong unit (1 um instead of 1 mm).
MAX_SEGMENTS_PER_COIL: int = 2_000_000

#: Relative tolerance below which two consecutive path points count as repeated.
REPEATED_POINT_RTOL: float = 1.0e-12

#: Two segments of one filament chain interact through the chain's GMD (Maxwell's device for
#: the self-inductance of a conductor) only while they belong to one stretch of it: adjacent
#: segments, or segments whose separation along the chain is at most this multiple of their
#: centre distance. Stretches that come back close to each other (the turns of a helix, the
#: legs of a hairpin) interact as two round wires do, through their centre distance (the GMD
#: of two disjoint discs is their centre distance: Maxwell 1873, from memory). On a smooth
#: curve of radius R the rule changes only pairs more than about 1.9 R apart, by
#: O((g / R)^2), the order a thin-wire formula neglects anyway.
CHAIN_ARC_OVER_CHORD: float = 2.0

#: Coils of different windings closer than this fraction of the smaller section size
#: are reported as intersecting.
INTERSECTION_CLEARANCE_FRACTION: float = 1.0

#: The target accuracy of the default solve preset (relative, inductance).
DEFAULT_TARGET_RELATIVE_ERROR: float = 1.0e-4
