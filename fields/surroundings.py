"""The interfaces of a source's surroundings: reflecting planes, shields and the enclosure.

The field orchestrator, the keep-out search, the maps and the drawings talk to the
surroundings only through these protocols, so a new kind of reflector, shield or
enclosure is a class that provides them (no change to the code that uses it).  The
models of this package are :class:`keepclear.fields.reflection.Reflector`,
:class:`keepclear.fields.shield.Shield` and
:class:`keepclear.fields.enclosure.Enclosure`.

Every object that can be drawn has ``outline()``: an (n, 3) array of points in
scenario coordinates [m] whose convex hull is the object (two points: a segment;
four coplanar: a flat rectangle, in order around it; eight: a box), or None where
there is no bounded shape (an infinite reflecting plane, drawn by its trace; a point
source).  The radiators of :mod:`keepclear.antennas` offer the same
(:meth:`keepclear.antennas.base.Radiator.outline`).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any, Protocol

import numpy as np
from numpy.typing import ArrayLike, NDArray

from keepclear.antennas.base import Radiator


class Drawable(Protocol):
    """Anything with drawing geometry."""

    def outline(self) -> NDArray[np.float64] | None:
        """Points (n, 3) whose convex hull is the object [m]; None when unbounded."""
        ...


class ReflectorModel(Drawable, Protocol):
    """A reflecting plane: the image method's view of it.

    ``normal`` is a unit vector pointing to the side where the sources are.
    """

    @property
    def point_m(self) -> NDArray[np.float64]:
        """Any point on the plane [m]."""
        ...

    @property
    def normal(self) -> NDArray[np.float64]:
        """Unit normal towards the sources [1]."""
        ...

    @property
    def material(self) -> str | None:
        """The material name, None for a surface given by its constants."""
        ...

    @property
    def label(self) -> str:
        """Name used in messages."""
        ...

    @property
    def reflection_coefficient(self) -> float | None:
        """A given angle-independent coefficient, None for a material or constants [1]."""
        ...

    @property
    def kind(self) -> str:
        """Short description of the surface for reports."""
        ...

    @property
    def is_perfect_conductor(self) -> bool:
        """True for a perfect conductor (Gamma = -1 for both polarisations)."""
        ...

    def coefficients(
        self, frequency_hz: float, cos_incidence: ArrayLike
    ) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
        """(gamma_perp, gamma_par) at the incidence cosines [1]."""
        ...

    def image_factors(
        self, frequency_hz: float, cos_incidence: ArrayLike
    ) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
        """Factors that turn a source's image field into the reflected field [1]."""
        ...

    def normal_incidence_coefficient(self, frequency_hz: float) -> complex:
        """E-field reflection coefficient at normal incidence [1]."""
        ...

    def transmitted_power_fraction(
        self, frequency_hz: float, cos_incidence: ArrayLike
    ) -> NDArray[np.float64]:
        """Share of the incident power that enters the surface [1]."""
        ...

    @property
    def mirror_matrix(self) -> NDArray[np.float64]:
        """The 3 x 3 reflection I - 2 n n^T [1]."""
        ...

    @property
    def is_finite(self) -> bool:
        """Whether the surface is a finite plate (else an infinite plane)."""
        ...

    @property
    def is_obstacle(self) -> bool:
        """Whether the surface blocks the rays that cross it (a finite metal plate)."""
        ...

    def aperture_factor(
        self, start_m: ArrayLike, end_m: ArrayLike, frequency_hz: float
    ) -> NDArray[np.complex128]:
        """Factor of a finite plate on the image rays from start to end points (1 if infinite)."""
        ...

    def obstacle_factor(
        self,
        start_m: ArrayLike,
        end_m: ArrayLike,
        frequency_hz: float,
        source_extent_m: float = 0.0,
    ) -> NDArray[np.float64]:
        """Amplitude factor of an opaque plate on the rays from start to end points [1]."""
        ...

    def signed_distance_m(self, points_m: ArrayLike) -> NDArray[np.float64]:
        """Distance of points in front of the plane (negative behind) [m]."""
        ...

    def mirror_points(self, points_m: ArrayLike) -> NDArray[np.float64]:
        """Mirror images of points in the plane [m]."""
        ...


class ShieldModel(Drawable, Protocol):
    """A shield: a sheet that weakens the rays that cross it."""

    def outline(self) -> NDArray[np.float64]:
        """The four corners (4, 3) of the sheet, in order around it [m]."""
        ...

    @property
    def label(self) -> str:
        """Name used in messages."""
        ...

    def amplitude_factor(
        self,
        source_points_m: ArrayLike,
        points_m: ArrayLike,
        source_extent_m: float = 0.0,
    ) -> NDArray[np.float64]:
        """Field amplitude factor (N,) for rays from the source point(s) to the points [1]."""
        ...

    def normal_incidence_se_db(self) -> float:
        """Shielding effectiveness at normal incidence, far from the edges [dB]."""
        ...


class EnclosureModel(Drawable, Protocol):
    """A closed box around sources: what is inside, what leaks out."""

    def outline(self) -> NDArray[np.float64]:
        """The eight outer corners (8, 3) of the box [m]."""
        ...

    @property
    def openings(self) -> Sequence[Any]:
        """The openings in the walls (holes, slots, vents, doors)."""
        ...

    def contains(self, points_m: ArrayLike) -> NDArray[np.bool_]:
        """Whether points lie strictly inside the cavity (N,)."""
        ...

    def in_wall(self, points_m: ArrayLike) -> NDArray[np.bool_]:
        """Whether points lie in the walls (N,)."""
        ...

    def opening_outline(self, opening: Any) -> NDArray[np.float64]:
        """Corners (4, 3) of an opening on the outer face, for drawing [m]."""
        ...

    def check_sources(self, positions_m: ArrayLike, labels: Sequence[str]) -> None:
        """Refuse a source inside a wall (an input error naming the source)."""
        ...

    def validity_warning(self, frequency_hz: float) -> str | None:
        """Why the cavity model is near the edge of its validity, or None."""
        ...

    def power_balance(self, total_power_w: float, frequency_hz: float) -> dict[str, Any]:
        """The cavity's power balance (absorbed, leaked, stored) for a power fed in."""
        ...

    def leakage_radiators(
        self, source_powers_w: Sequence[float], frequency_hz: float
    ) -> list[tuple[Radiator, NDArray[np.float64]]]:
        """Radiators of the openings, each with the share of every source it carries."""
        ...

    def face_density_5cm(self, total_power_w: float, frequency_hz: float) -> list[dict[str, Any]]:
        """Power density 5 cm from each face with an opening (product-emission checks)."""
        ...


__all__ = ["Drawable", "EnclosureModel", "ReflectorModel", "ShieldModel"]
