"""Spatial average of the power density over a standing person's height.

Model
-----
Whole-body reference levels are set for exposure averaged over the body: ICNIRP (2020)
Table 5 is "averaged over 30 min and the whole body", and its Table 6, note 3 has
fields averaged as squared values over the projected body space (FOUND, secondary);
the FCC and IEEE maximum permissible exposures are likewise spatially averaged values,
and in survey practice the spatial average is taken along a vertical line from the
ground to head height (FOUND, secondary: the radhaz.com note on spatial averaging of
RF fields).  Power density is the squared-field quantity, so it is averaged directly.

The scheme used here is the **vertical-line average by the composite midpoint rule**:
the line from :math:`z_0` to :math:`z_1` at the place's x, y is cut into
:data:`POINTS` = 20 equal segments and the time-averaged power density is evaluated
at each segment's centre,

.. math::

    \\bar S = \\frac{1}{N} \\sum_{i=0}^{N-1} S\\!\\left(x, y,
              z_0 + (i + \\tfrac12)\\,\\frac{z_1 - z_0}{N}\\right), \\qquad N = 20,

so over a 2 m line the points are 0.1 m apart, from 0.05 m to 1.95 m.  The number of
points and their spacing are our choice (common practice, no source); 20 points over a
body height resolves the floor-reflection standing wave only in its average, which
is what the average is for.

Which value meets which limit
-----------------------------
The spatial average is compared with the **whole-body** limits (ICNIRP 2020 Table 5,
IEEE C95.1-2019, FCC 47 CFR 1.1310, Safety Code 6); the point value (the peak spatial
value at the named place) stays the one compared with **local** limits (ICNIRP 2020
Table 6), product emission limits (FDA 21 CFR 1030.10) and device thresholds.  Both
are reported; the point value is never replaced.

References
----------
.. [1] ICNIRP, Health Phys. 118(5):483-524 (2020), Table 5 (whole-body, 30 min) and
   Table 6 note 3 (squared values averaged over the projected body space).
.. [2] FCC OET Bulletin 65, Edition 97-01 (1997), sec. 2 (spatial averaging over the
   body; from memory).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

#: Points of the vertical-line average.
POINTS = 20
#: Name of the scheme, for reports.
SCHEME = (
    "vertical-line average, composite midpoint rule: 20 equally spaced points at the "
    "centres of 20 equal segments of the line (0.1 m apart over 2 m)"
)
#: Limit ids compared with a point value even where a spatial average is given.
LOCAL_OR_PRODUCT_PREFIXES = (
    "icnirp-2020/general-public-local",
    "icnirp-2020/occupational-local",
    "fda-",
)


def line_points_m(
    position_m: NDArray[np.float64], span_m: tuple[float, float]
) -> NDArray[np.float64]:
    """The scheme's points (POINTS, 3) on the vertical line at the place's x, y [m]."""
    z0, z1 = float(span_m[0]), float(span_m[1])
    step = (z1 - z0) / POINTS
    z = z0 + (np.arange(POINTS) + 0.5) * step
    pts = np.empty((POINTS, 3))
    pts[:, 0] = position_m[0]
    pts[:, 1] = position_m[1]
    pts[:, 2] = z
    return pts


def spatial_average(values: NDArray[np.float64]) -> float:
    """Mean of the scheme's point values (the composite midpoint rule) [same unit]."""
    v = np.asarray(values, dtype=float)
    if v.shape != (POINTS,):
        raise ValueError(f"expected {POINTS} values, got shape {v.shape}")
    return float(np.mean(v))


def compared_with_average(limit_id: str, device: bool = False) -> bool:
    """Whether a limit is compared with the spatial average (whole-body) or the point value."""
    if device or limit_id.startswith("custom/") or limit_id.startswith("iec-"):
        return False
    return not any(limit_id.startswith(p) for p in LOCAL_OR_PRODUCT_PREFIXES)


__all__ = ["POINTS", "SCHEME", "compared_with_average", "line_points_m", "spatial_average"]
