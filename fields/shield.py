"""Flat shield sheets between sources and people: the ``[[shield]]`` scenario array.

A :class:`Shield` is a finite flat rectangle (a metal sheet, a perforated plate, a wire
mesh, a sheet with a slot, or a panel with a rated shielding effectiveness).  The field
orchestrator multiplies a radiating term's fields by :meth:`Shield.amplitude_factor`,
which is below 1 only for points whose straight ray from the source crosses the sheet.

What is and is not modelled, in order of importance:

* **Edges.**  Diffraction around a finite sheet can carry far more field than the sheet
  passes.  The sheet is a thin rectangle in the Fresnel-Kirchhoff (Babinet) model of
  :mod:`keepclear.fields.diffraction`: every edge is a knife edge of ITU-R P.526
  sec. 4.1 with a *signed* parameter nu (positive on the sheet's side), the four edges
  and the corners combined per P.526 sec. 5.2 (rectangular screen), and the field the
  sheet passes added in the worst phase (:func:`~keepclear.fields.diffraction.obstacle_factor`).
  The factor is continuous everywhere except through the sheet itself: it falls
  smoothly from the lit side (where the Fresnel ripple can exceed 1 by up to 1.4 dB
  beside one edge of a wide sheet, and by up to 2.84 dB beside a sheet a few Fresnel
  zones across, where the ripples of its edges meet) through 0.5 (-6 dB) on the shadow
  boundary to, deep in the shadow,
  the four edges' knife-edge fields added in magnitude plus the sheet's own
  transmission (the credit of the earlier hard-edge model there).  ``edge_margin_m``
  (default 0) shrinks the credited sheet on every side (a frame or seams near the edge
  that do not shield).  A source of finite size (``source_extent_m``) gets the largest
  factor over the rays from every corner of its bounding cube: this moves the shadow
  boundary to the safe side, and it also spreads the lit-side ripple over a band as wide
  as the source seen through the edge (the ray of one corner at the ripple's peak sets
  the factor), so a sheet beside the farthest reach of a zone can widen a keep-out.
  ``compare`` marks such an option (:func:`shields_differ` names the sheet as the cause).
* **Oblique incidence.**  The sheet's transmission is evaluated at the ray's angle, for
  the worse polarisation (TM for sheets: its reflection loss falls as
  20 log10(1 / cos theta)); a rated or slot panel loses 20 log10(1 / cos theta) of its
  normal-incidence value.
* **Near field.**  Within lambda/(2 pi) of the source the wave impedance is not eta0.
  For a magnetic (low-impedance) near field the reflection loss of a solid sheet can
  be far below its plane-wave value, so a solid sheet keeps only its absorption
  (R dropped, B kept where negative); an aperture-type panel loses
  20 log10(lambda / (2 pi r)) (Ott's near-field aperture rule).
* Not modelled: seams and joints (which leak most), reflections from the sheet back
  towards the source side (declare a finite ``[[reflector]]`` for that), and the field
  scattered by the sheet beyond the Fresnel-Kirchhoff model.  An added shield never
  lowers the field on the source side, and raises it on the far side only by the
  Fresnel ripple beside an edge (at most 2.84 dB, the largest |1 - A| of the
  Fresnel-Kirchhoff rectangle factor over all edge parameters,
  :data:`keepclear.fields.diffraction.RECTANGLE_RIPPLE`).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Final, Protocol

import numpy as np
from numpy.typing import ArrayLike, NDArray

from keepclear.antennas.base import C_M_S, ModelInputError, as_points, unit_vector

from . import diffraction
from . import shielding as sh

#: Shield types a scenario file may give as ``type``.
SHIELD_TYPES: Final[tuple[str, ...]] = ("sheet", "perforated", "mesh", "slot", "rated")
#: Hole shapes of a perforated plate.
HOLE_SHAPES: Final[tuple[str, ...]] = ("round", "square", "hexagonal")
#: Hole arrangements of a perforated plate.
LATTICES: Final[tuple[str, ...]] = ("triangular", "square")


def _oblique_and_near(
    se0_db: NDArray[np.float64],
    cos_incidence: NDArray[np.float64],
    source_distance_m: NDArray[np.float64],
    frequency_hz: float,
) -> NDArray[np.float64]:
    """A normal-incidence, far-field SE made conservative for angle and near field [dB]."""
    c = np.clip(cos_incidence, 1e-9, 1.0)
    se = np.maximum(se0_db + 20 * np.log10(c), 0.0)
    return sh.near_field_aperture_se_db(se, source_distance_m, frequency_hz)


class ShieldSpec(Protocol):
    """What a shield is made of: its power transmission for a ray."""

    @property
    def kind(self) -> str:
        """The shield type (``"sheet"``, ``"perforated"``, ...)."""
        ...

    def power_transmission(
        self,
        frequency_hz: float,
        cos_incidence: NDArray[np.float64],
        source_distance_m: NDArray[np.float64],
    ) -> NDArray[np.float64]:
        """Transmitted / incident power density for rays [1]."""
        ...

    def normal_incidence_se_db(self, frequency_hz: float) -> float:
        """Plane-wave SE at normal incidence [dB]."""
        ...


@dataclass(frozen=True)
class SheetSpec:
    """A solid metal sheet.

    Parameters
    ----------
    metal : Metal
        Sheet metal.
    thickness_m : float
        Thickness [m].

    Notes
    -----
    Far from the source (beyond lambda / 2 pi): Schelkunoff's SE at the ray's angle,
    worse polarisation (:func:`~keepclear.fields.shielding.sheet_power_transmission`).
    Nearer: absorption only, A + min(B, 0), because the near-field reflection loss of a
    low-impedance (magnetic) wave can be much less than the plane-wave R.  Ott (2009,
    sec. 6.5; from memory) gives R_H = 14.6 + 10 log10(f r^2 sigma_r / mu_r) for a magnetic
    source, which falls towards 0 dB as r shrinks, and R_E = 322 - 10 log10(mu_r f^3 r^2 /
    sigma_r) for an electric one, which is larger than the plane-wave value; the source
    type is not known, so the magnetic case is taken, and R is dropped altogether.
    """

    metal: sh.Metal
    thickness_m: float
    kind: str = "sheet"

    def __post_init__(self) -> None:
        if not (math.isfinite(self.thickness_m) and self.thickness_m > 0):
            raise ModelInputError(
                "thickness_m", f"thickness_m must be > 0, got {self.thickness_m!r}"
            )

    def power_transmission(
        self,
        frequency_hz: float,
        cos_incidence: NDArray[np.float64],
        source_distance_m: NDArray[np.float64],
    ) -> NDArray[np.float64]:
        """Transmitted / incident power density [1] (see class notes)."""
        m = self.metal
        far = sh.sheet_power_transmission(
            frequency_hz,
            m.conductivity_s_m,
            self.thickness_m,
            m.relative_permeability,
            cos_incidence,
            "worst",
        )
        terms = sh.schelkunoff_sheet_se(
            frequency_hz, m.conductivity_s_m, self.thickness_m, m.relative_permeability
        )
        near_db = float(terms.absorption_db + min(float(terms.multiple_reflection_db), 0.0))
        near = 10 ** (-near_db / 10) if near_db < 3000 else 0.0
        is_near = np.asarray(source_distance_m) < C_M_S / (2 * np.pi * frequency_hz)
        return np.where(is_near, np.maximum(far, near), far)

    def normal_incidence_se_db(self, frequency_hz: float) -> float:
        """Plane-wave SE at normal incidence [dB]."""
        m = self.metal
        return float(
            sh.schelkunoff_sheet_se(
                frequency_hz, m.conductivity_s_m, self.thickness_m, m.relative_permeability
            ).total_db
        )


@dataclass(frozen=True)
class PerforatedSpec:
    """A metal plate perforated with a regular array of holes.

    Parameters
    ----------
    hole_size_m : float
        Hole diameter (round), side (square) or across-flats width (hexagonal) [m].
    pitch_m : float
        Centre-to-centre hole spacing [m].
    thickness_m : float
        Plate thickness [m].
    hole_shape : {"round", "square", "hexagonal"}
        Hole shape.
    lattice : {"triangular", "square"}
        Hole arrangement (triangular = staggered; the default, more holes per area).
    metal : Metal
        Plate metal (caps the shielding at the solid sheet's).

    Notes
    -----
    :func:`~keepclear.fields.shielding.perforated_plate_power_transmission` at the
    ray's angle (worse polarisation), then the near-field aperture reduction.
    """

    hole_size_m: float
    pitch_m: float
    thickness_m: float
    hole_shape: str = "round"
    lattice: str = "triangular"
    metal: sh.Metal = field(default_factory=lambda: sh.METALS[sh.WORST_METAL])
    kind: str = "perforated"

    def _far(self, frequency_hz: float, cos_incidence: ArrayLike) -> NDArray[np.float64]:
        return sh.perforated_plate_power_transmission(
            frequency_hz,
            self.hole_size_m,
            self.pitch_m,
            self.thickness_m,
            hole_shape=self.hole_shape,
            lattice=self.lattice,
            cos_incidence=cos_incidence,
            polarization="worst",
            metal=self.metal,
            warn=False,
        )

    def power_transmission(
        self,
        frequency_hz: float,
        cos_incidence: NDArray[np.float64],
        source_distance_m: NDArray[np.float64],
    ) -> NDArray[np.float64]:
        """Transmitted / incident power density [1]."""
        se = sh.se_db_from_power_transmission(self._far(frequency_hz, cos_incidence))
        se = sh.near_field_aperture_se_db(np.minimum(se, 3000.0), source_distance_m, frequency_hz)
        return 10 ** (-se / 10)

    def normal_incidence_se_db(self, frequency_hz: float) -> float:
        """Plane-wave SE at normal incidence [dB]."""
        return float(sh.se_db_from_power_transmission(self._far(frequency_hz, 1.0)))


@dataclass(frozen=True)
class MeshSpec:
    """A bonded square wire mesh.

    Parameters
    ----------
    pitch_m : float
        Wire spacing [m].
    wire_diameter_m : float
        Wire diameter [m].
    metal : Metal
        Wire metal (caps the shielding at a solid sheet of the wire's thickness).

    Notes
    -----
    :func:`~keepclear.fields.shielding.wire_mesh_power_transmission`, then the
    near-field aperture reduction.
    """

    pitch_m: float
    wire_diameter_m: float
    metal: sh.Metal = field(default_factory=lambda: sh.METALS[sh.WORST_METAL])
    kind: str = "mesh"

    def _far(self, frequency_hz: float, cos_incidence: ArrayLike) -> NDArray[np.float64]:
        return sh.wire_mesh_power_transmission(
            frequency_hz,
            self.pitch_m,
            self.wire_diameter_m,
            cos_incidence=cos_incidence,
            polarization="worst",
            metal=self.metal,
        )

    def power_transmission(
        self,
        frequency_hz: float,
        cos_incidence: NDArray[np.float64],
        source_distance_m: NDArray[np.float64],
    ) -> NDArray[np.float64]:
        """Transmitted / incident power density [1]."""
        se = sh.se_db_from_power_transmission(self._far(frequency_hz, cos_incidence))
        se = sh.near_field_aperture_se_db(np.minimum(se, 3000.0), source_distance_m, frequency_hz)
        return 10 ** (-se / 10)

    def normal_incidence_se_db(self, frequency_hz: float) -> float:
        """Plane-wave SE at normal incidence [dB]."""
        return float(sh.se_db_from_power_transmission(self._far(frequency_hz, 1.0)))


@dataclass(frozen=True)
class SlotSpec:
    """A metal sheet with one or more identical slots (or holes) of a given length.

    Parameters
    ----------
    slot_length_m : float
        Longest dimension of each slot [m].
    slot_count : int
        Number of identical slots n.
    metal : Metal, optional
        Sheet metal; with ``thickness_m`` it caps the credit at the solid sheet's.
    thickness_m : float, optional
        Sheet thickness [m].

    Notes
    -----
    Ott's aperture rule 20 log10(lambda / 2L) - 10 log10(n), at least 0 dB; no credit
    at all for L >= lambda / 2.  The slot's depth through the sheet is not credited.
    """

    slot_length_m: float
    slot_count: int = 1
    metal: sh.Metal | None = None
    thickness_m: float | None = None
    kind: str = "slot"

    def __post_init__(self) -> None:
        if not (math.isfinite(self.slot_length_m) and self.slot_length_m > 0):
            raise ModelInputError(
                "slot_length_m", f"slot_length_m must be > 0, got {self.slot_length_m!r}"
            )
        if self.slot_count < 1:
            raise ModelInputError("slot_count", f"slot_count must be >= 1, got {self.slot_count!r}")

    def normal_incidence_se_db(self, frequency_hz: float) -> float:
        """Plane-wave SE at normal incidence [dB]."""
        se = float(
            sh.aperture_se_db(frequency_hz, self.slot_length_m)
            + sh.multiple_aperture_correction_db(self.slot_count)
        )
        return max(se, 0.0)

    def power_transmission(
        self,
        frequency_hz: float,
        cos_incidence: NDArray[np.float64],
        source_distance_m: NDArray[np.float64],
    ) -> NDArray[np.float64]:
        """Transmitted / incident power density [1]."""
        se0 = np.full(np.shape(cos_incidence), self.normal_incidence_se_db(frequency_hz))
        t = 10 ** (-_oblique_and_near(se0, cos_incidence, source_distance_m, frequency_hz) / 10)
        if self.metal is not None and self.thickness_m is not None:
            m = self.metal
            t = np.maximum(
                t,
                sh.sheet_power_transmission(
                    frequency_hz,
                    m.conductivity_s_m,
                    self.thickness_m,
                    m.relative_permeability,
                    cos_incidence,
                    "worst",
                ),
            )
        return t


@dataclass(frozen=True)
class RatedSpec:
    """A panel with a given (measured or specified) shielding effectiveness.

    Parameters
    ----------
    shielding_db : float
        Plane-wave SE at normal incidence [dB].

    Notes
    -----
    Reduced by 20 log10(1 / cos theta) at oblique incidence and by the near-field
    aperture rule within lambda / 2 pi, as for a slot: a rating is usually a
    far-field, normal-incidence figure.
    """

    shielding_db: float
    kind: str = "rated"

    def __post_init__(self) -> None:
        if not (math.isfinite(self.shielding_db) and 0 <= self.shielding_db <= 300):
            raise ModelInputError(
                "shielding_db", f"shielding_db must lie in 0..300 dB, got {self.shielding_db!r}"
            )

    def normal_incidence_se_db(self, frequency_hz: float) -> float:
        """Plane-wave SE at normal incidence [dB]."""
        return float(self.shielding_db)

    def power_transmission(
        self,
        frequency_hz: float,
        cos_incidence: NDArray[np.float64],
        source_distance_m: NDArray[np.float64],
    ) -> NDArray[np.float64]:
        """Transmitted / incident power density [1]."""
        se0 = np.full(np.shape(cos_incidence), float(self.shielding_db))
        return 10 ** (-_oblique_and_near(se0, cos_incidence, source_distance_m, frequency_hz) / 10)


@dataclass(frozen=True, eq=False)
class Shield:
    """A flat rectangular shield sheet.

    Parameters
    ----------
    center_m : array_like, shape (3,)
        Centre of the sheet [m].
    normal : array_like, shape (3,)
        Sheet normal (either side; normalised here).
    width_m, height_m : float
        Sheet size along the width and height axes [m].
    spec : ShieldSpec
        What the sheet is made of (:class:`SheetSpec`, :class:`PerforatedSpec`,
        :class:`MeshSpec`, :class:`SlotSpec` or :class:`RatedSpec`).
    frequency_hz : float
        Operating frequency [Hz].
    up : array_like, shape (3,), optional
        Direction of the height edges (projected into the sheet).  Default +z, or +y
        for a horizontal sheet (normal within about 25 degrees of vertical).
    edge_margin_m : float, optional
        The credited sheet is this much smaller than the sheet on every side [m].
        Default 0.
    label : str
        Name for reports.

    Notes
    -----
    The in-plane axes are ``height_axis`` (from ``up``) and
    ``width_axis = height_axis x normal``.  See the module docstring for the edge,
    angle and near-field rules.
    """

    center_m: NDArray[np.float64]
    normal: NDArray[np.float64]
    width_m: float
    height_m: float
    spec: ShieldSpec
    frequency_hz: float
    up: NDArray[np.float64] | None = None
    edge_margin_m: float | None = None
    label: str = "shield"
    width_axis: NDArray[np.float64] = field(init=False, repr=False)
    height_axis: NDArray[np.float64] = field(init=False, repr=False)

    def __post_init__(self) -> None:
        center = np.asarray(self.center_m, dtype=float)
        if center.shape != (3,) or not np.all(np.isfinite(center)):
            raise ModelInputError(
                "center_m", f"center_m must be three finite numbers, got {self.center_m!r}"
            )
        n = unit_vector(self.normal, "normal")
        for key in ("width_m", "height_m"):
            value = getattr(self, key)
            if not (math.isfinite(value) and value > 0):
                raise ModelInputError(key, f"{key} must be > 0, got {value!r}")
        if not (math.isfinite(self.frequency_hz) and self.frequency_hz > 0):
            raise ModelInputError("frequency_hz", "frequency_hz must be > 0")
        if self.up is None:
            up = np.array([0.0, 0.0, 1.0]) if abs(n[2]) < 0.9 else np.array([0.0, 1.0, 0.0])
        else:
            up = unit_vector(self.up, "up")
        v = up - np.dot(up, n) * n
        if np.linalg.norm(v) < 1e-6:
            raise ModelInputError(
                "up", "up must not be parallel to normal: give the direction of the height edge"
            )
        v = v / np.linalg.norm(v)
        u = np.cross(v, n)
        margin = 0.0 if self.edge_margin_m is None else self.edge_margin_m
        if not (math.isfinite(margin) and margin >= 0):
            raise ModelInputError("edge_margin_m", f"edge_margin_m must be >= 0, got {margin!r}")
        object.__setattr__(self, "center_m", center)
        object.__setattr__(self, "normal", n)
        object.__setattr__(self, "up", v)
        object.__setattr__(self, "edge_margin_m", float(margin))
        object.__setattr__(self, "width_axis", u)
        object.__setattr__(self, "height_axis", v)
        # Surface parameter errors (e.g. a pitch beyond lambda/2) at construction.
        self.spec.power_transmission(self.frequency_hz, np.ones(1), np.full(1, np.inf))

    @property
    def wavelength_m(self) -> float:
        """Free-space wavelength [m]."""
        return C_M_S / self.frequency_hz

    def corners(self) -> NDArray[np.float64]:
        """The four corners (4, 3), in order around the sheet [m]."""
        hw, hh = self.width_m / 2, self.height_m / 2
        u, v = self.width_axis, self.height_axis
        c = self.center_m
        return np.array(
            [c - hw * u - hh * v, c + hw * u - hh * v, c + hw * u + hh * v, c - hw * u + hh * v]
        )

    def outline(self) -> NDArray[np.float64]:
        """Corners (4, 3) of the sheet, in order around it, for drawing [m].

        The same form as every drawable object (radiators, reflectors, the enclosure):
        points whose convex hull is the object.
        """
        return self.corners()

    def normal_incidence_se_db(self) -> float:
        """The sheet's plane-wave SE at normal incidence [dB] (for reports)."""
        return self.spec.normal_incidence_se_db(self.frequency_hz)

    def amplitude_factor(
        self,
        source_points_m: ArrayLike,
        points_m: ArrayLike,
        source_extent_m: float = 0.0,
    ) -> NDArray[np.float64]:
        """Field amplitude factor of the shield for rays from a source to points.

        Parameters
        ----------
        source_points_m : array_like, shape (3,) or (N, 3)
            The source (or image) point, one for all points or one per point [m].
        points_m : array_like, shape (N, 3)
            Field points [m].
        source_extent_m : float
            Half-size of the source: credit only where the rays from all eight corners
            of the cube of this half-size around the source cross the sheet [m].

        Returns
        -------
        ndarray, shape (N,)
            Positive: 1 where the ray does not cross the sheet's plane; elsewhere the
            Fresnel-Kirchhoff factor of
            :func:`~keepclear.fields.diffraction.obstacle_factor` with the sheet's
            transmission sqrt(T) at the ray's angle; the largest value over the source
            corners.

        Notes
        -----
        The knife-edge parameter of an edge is
        :math:`\\nu = h\\sqrt{2(d_1+d_2)/(\\lambda d_1 d_2)}`, h the signed distance
        between the ray and the edge line (positive on the sheet's side), d1 and d2 the
        distances from the source and the point to the crossing point (ITU-R P.526,
        sec. 4.1).
        """
        pts = as_points(points_m)
        src = np.asarray(source_points_m, dtype=float)
        if src.ndim == 1:
            src = np.broadcast_to(src.reshape(1, 3), pts.shape)
        elif src.shape == (1, 3):
            src = np.broadcast_to(src, pts.shape)
        if src.shape != pts.shape:
            raise ValueError(
                f"source_points_m must have shape (3,) or {pts.shape}, got {src.shape}"
            )
        extent = float(source_extent_m)
        if not (math.isfinite(extent) and extent >= 0):
            raise ValueError(f"source_extent_m must be >= 0, got {source_extent_m!r}")
        axes = np.column_stack([self.width_axis, self.height_axis, self.normal])
        offsets = diffraction.cube_offsets(extent, axes)
        return diffraction.largest_over_corners(
            self._factor_from, src, pts, offsets, plane=(self.center_m, self.normal)
        )

    def _factor_from(self, src: NDArray[np.float64], pts: NDArray[np.float64]) -> NDArray:
        hw = self.width_m / 2 - float(self.edge_margin_m or 0.0)
        hh = self.height_m / 2 - float(self.edge_margin_m or 0.0)
        out = np.ones(pts.shape[0])
        if hw <= 0 or hh <= 0:  # the margin leaves nothing to credit
            return out
        geo = diffraction.rectangle_crossing(
            src,
            pts,
            self.center_m,
            self.normal,
            self.width_axis,
            self.height_axis,
            hw,
            hh,
            self.wavelength_m,
        )
        if not geo.crossing.any():
            return out
        c = geo.crossing
        t = self.spec.power_transmission(self.frequency_hz, geo.cos_incidence[c], geo.d1_m[c])
        tau = np.sqrt(np.clip(t, 0.0, 1.0))
        out[c] = diffraction.obstacle_factor(geo.nu[:, c], tau)
        return out


def sheet_key(s: object) -> tuple[object, ...]:
    """What makes a shield sheet the same sheet: place, size, margin and make-up."""
    if not isinstance(s, Shield):
        return (id(s),)
    return (
        tuple(s.center_m),
        tuple(s.normal),
        tuple(s.height_axis),
        s.width_m,
        s.height_m,
        s.edge_margin_m,
        repr(s.spec),
    )


def shields_differ(a: Sequence[object], b: Sequence[object]) -> bool:
    """Whether two scenarios' shield sheets differ (place, size, margin or make-up)."""
    return [sheet_key(s) for s in a] != [sheet_key(s) for s in b]


__all__ = [
    "HOLE_SHAPES",
    "LATTICES",
    "SHIELD_TYPES",
    "MeshSpec",
    "PerforatedSpec",
    "RatedSpec",
    "SheetSpec",
    "Shield",
    "ShieldSpec",
    "SlotSpec",
    "sheet_key",
    "shields_differ",
]
