"""Reflecting planes: Fresnel coefficients and the image method.

Model
-----
A reflector is an infinite plane through ``point_m`` with unit normal
:math:`\\hat n` pointing to the side of the sources (the *accessible* side).  The
other side is a homogeneous half-space: a perfect conductor (``metal``), an
ITU-R P.2040 material or a given complex permittivity, or an idealised surface
with a given, angle-independent reflection coefficient.

Geometry.  The signed distance of a point is :math:`d(p) = (p - p_0)\\cdot\\hat n`
(> 0 on the source side).  The mirror image of a point is
:math:`\\mathcal M p = p - 2 d(p)\\, \\hat n`, whose linear part is the reflection
matrix :math:`M = I - 2 \\hat n \\hat n^T` (symmetric, orthogonal, det M = -1).

Exact images over a perfect conductor.  Let (E, H) be the source's field.  Under
the improper map :math:`x \\mapsto \\mathcal M x` a polar vector field goes to
:math:`M E(\\mathcal M x)` and an axial one to :math:`\\det(M)\\, M H(\\mathcal M x)`;
the pair is again a solution of Maxwell's equations (with mirrored sources), and
so is its negative:

.. math::

    E_\\mathrm{img}(p) = -M\\, E(\\mathcal M p), \\qquad
    H_\\mathrm{img}(p) = +M\\, H(\\mathcal M p).

On the plane (:math:`\\mathcal M p = p`) the total field obeys the conductor's
boundary conditions, :math:`\\hat n \\times (I - M) E = 2\\hat n \\times \\hat n
(\\hat n \\cdot E) = 0` and :math:`\\hat n\\cdot(I + M) H = 0`; the image sources
lie on the far side, so by uniqueness :math:`E + E_\\mathrm{img}` is the exact
field over the conducting plane.  Only the source's fields are used, obtained by
calling ``radiator.fields`` at the mirrored points, so this holds for every model
(wires, apertures, isotropic).  For an electric current element the image current
is :math:`-M J` (horizontal reversed, vertical kept: Balanis [2]_ sec. 4.7.1).

Other materials (ray optics).  The reflected field at p is taken as the exact
conductor image with each polarisation scaled by the ratio of the material's
Fresnel coefficient to the conductor's.  The plane of incidence at p contains
:math:`\\hat n` and the ray :math:`\\hat k = (p - s')/|p - s'|` from the image
reference point :math:`s' = \\mathcal M s`; :math:`\\cos\\theta = \\hat k\\cdot\\hat n`.
With :math:`\\hat s = \\hat n\\times\\hat k / |\\hat n\\times\\hat k|`:

.. math::

    E_r = a_s (E_\\mathrm{img}\\cdot\\hat s)\\hat s
          + a_p [E_\\mathrm{img} - (E_\\mathrm{img}\\cdot\\hat s)\\hat s], \\qquad
    H_r = a_p (H_\\mathrm{img}\\cdot\\hat s)\\hat s
          + a_s [H_\\mathrm{img} - (H_\\mathrm{img}\\cdot\\hat s)\\hat s],

with :math:`a_s = \\Gamma_\\perp/(-1)` and :math:`a_p = \\Gamma_\\parallel/(+1)`: the
part of E perpendicular to the plane of incidence (TE, "s") takes the TE
coefficient, the part in it (TM, "p", including any radial near-field part)
the TM coefficient; for H the roles swap.  For a conductor both factors are 1
and the exact image is recovered.

Coefficient convention (time :math:`e^{+j\\omega t}`, incidence from air).
:math:`\\Gamma_\\perp` is the ratio of reflected to incident E along
:math:`\\hat s`; :math:`\\Gamma_\\parallel` is the ratio of the H components along
:math:`\\hat s` (equivalently of E along :math:`\\hat s\\times\\hat k`):

.. math::

    \\Gamma_\\perp = \\frac{\\cos\\theta - \\sqrt{\\varepsilon_r - \\sin^2\\theta}}
                        {\\cos\\theta + \\sqrt{\\varepsilon_r - \\sin^2\\theta}}, \\qquad
    \\Gamma_\\parallel = \\frac{\\varepsilon_r\\cos\\theta
                             - \\sqrt{\\varepsilon_r - \\sin^2\\theta}}
                             {\\varepsilon_r\\cos\\theta
                             + \\sqrt{\\varepsilon_r - \\sin^2\\theta}}.

A perfect conductor has :math:`\\Gamma_\\perp = -1`, :math:`\\Gamma_\\parallel = +1`;
at normal incidence :math:`\\Gamma_\\parallel = -\\Gamma_\\perp`.  Balanis [1]_ writes
the parallel coefficient for the E-field with reference directions that give -1 at
a conductor, i.e. the negative of ours (sign relation from memory).  A given
``reflection_coefficient`` :math:`\\Gamma` is the normal-incidence E-field
coefficient (-1 = metal-like) applied to both polarisations at all angles:
:math:`\\Gamma_\\perp = \\Gamma`, :math:`\\Gamma_\\parallel = -\\Gamma`, i.e. the
reflected field is :math:`-\\Gamma` times the conductor image.

Several planes.  Each plane gives a first-order image; with ``order=2`` every
ordered pair (i, j), i != j, gives the image of the i-image in plane j (first
bounce on i, last on j), with the product of the two planes' factors each taken at
its own reflection point and angle.  An image contributes only where its path
exists: the field point and every reflection point must lie on the accessible side
of all planes (the intersection of the half-spaces, convex, so the straight legs
stay inside).  For a 90-degree conducting corner this gives exactly the three
images of the classical solution (Balanis [2]_, corner reflector, ch. 15).

Points behind any infinite reflector (d < 0) get no reflected field; the
orchestrator uses :func:`transmission_power_factor` for the direct ray there.

Finite plates (``size_m``, physical optics in Fresnel form).  A plate is a rectangle
of the plane, centred on ``point_m``.  Its image is the infinite plane's, multiplied by
the Fresnel-Kirchhoff factor A of a rectangular aperture seen from the image point
(:func:`keepclear.fields.diffraction.rectangle_aperture_factor`, ITU-R P.526 [4]_
sec. 5.2.1.1): the physical-optics integral of the plate's induced currents in the
Fresnel (paraxial) approximation, the Fresnel coefficients taken at the specular
angle.  A is about 1 where the specular point lies well inside the plate (a plate
much larger than the first Fresnel zone is the infinite plane), 1/2 where it lies on an
edge, and falls smoothly to the edge-diffracted field outside: the field is continuous
across the reflection boundary.  A plate much smaller than the first Fresnel zone
gives :math:`|A| = ab\\cos\\theta\\,(d_1 + d_2)/(\\lambda d_1 d_2)`, the physical-optics
flat-plate result :math:`\\sigma = 4\\pi (ab\\cos\\theta/\\lambda)^2` (Balanis [1]_
sec. 11.3; Knott, Shaeffer and Tuley [5]_).  The phase of A follows the path length,
so the coherent mode keeps the standing-wave pattern.  For a second-order path each
plate on it contributes its A along the unfolded ray (the image of the earlier bounces
to the field point mirrored in the later planes).  A plate reflects on both faces (the
floor's image reaches the underside of a table); a plate never bounds the space, so
every other plane's images are in play beside, over and under it.  Behind a plate
(on its far side) its own image is 0; the orchestrator keeps the direct ray there in
full for a non-metal plate (as for a non-metal infinite plane) and applies the opaque
plate's diffraction factor for a metal one (:func:`plate_obstacle_factor`, the same
Fresnel-Kirchhoff model as shield sheets).  Against the uniform theory of diffraction
(Kouyoumjian and Pathak [6]_) this scalar model differs mostly at wide diffraction
angles, where the diffracted field is weak, and it does not follow the polarisation of
the edge-diffracted field.

Assumptions and range of validity
---------------------------------
* Planes are flat; an infinite plane's far side is a half-space and a plate is
  thin, so a wall has no thickness: no slab resonance, no absorption inside it.
* Plates: scalar paraxial physical optics (accurate for source and field point
  several wavelengths away and rays within some tens of degrees of the specular
  direction); no surface waves, no edge currents beyond physical optics, no
  multiple bounces between a plate and the source.
* Ray optics for non-conducting planes: the Fresnel coefficient at the image
  ray's angle.  Accurate when the source and the field point are more than about
  a wavelength from the plane; surface-wave (Sommerfeld) terms near the
  interface are ignored.  For ``metal`` the image is exact at any distance.
* A source whose structure crosses a plane is not detected; a source behind a
  plane is an input error.

References
----------
.. [1] C. A. Balanis, *Advanced Engineering Electromagnetics*, 2nd ed., Wiley,
   2012, sec. 5.3 (oblique incidence on a planar interface: perpendicular and
   parallel polarisation, Brewster angle) and sec. 7.4 (image theory).
.. [2] C. A. Balanis, *Antenna Theory: Analysis and Design*, 4th ed., Wiley, 2016,
   sec. 4.7 (ground effects: image theory, vertical and horizontal electric
   dipoles above a conductor) and ch. 15 (corner reflector).
.. [3] Recommendation ITU-R P.2040-3 (08/2023), sec. 2.2.1 (plane-wave reflection
   at a planar interface; 2.2.1.5 simplified expressions for incidence from air)
   and sec. 2.2.1.4 (coefficients for power flux densities).
.. [4] Recommendation ITU-R P.526-15 (10/2019), *Propagation by diffraction*, sec. 4.1
   (knife edge) and sec. 5.2 (rectangular apertures and screens).
.. [5] E. F. Knott, J. F. Shaeffer and M. T. Tuley, *Radar Cross Section*, 2nd ed.,
   Artech House, 1993, ch. 5 (physical optics; flat plate sigma = 4 pi A^2 / lambda^2 at
   normal incidence; chapter from memory).
.. [6] R. G. Kouyoumjian and P. H. Pathak, "A uniform geometrical theory of diffraction
   for an edge in a perfectly conducting surface", Proc. IEEE 62(11), 1448-1461, 1974.
"""

from __future__ import annotations

import functools
from collections.abc import Sequence
from dataclasses import dataclass
from dataclasses import field as dataclass_field
from typing import Final

import numpy as np
from numpy.typing import ArrayLike, NDArray

from keepclear.antennas.base import (
    C_M_S,
    ModelInputError,
    Radiator,
    as_points,
    row_norms,
    unit_vector,
)
from keepclear.antennas.memo import radiator_fields

from . import diffraction
from .materials import (
    canonical_material_name,
    complex_permittivity,
    relative_permittivity_itu_p2040,
)
from .surroundings import ReflectorModel

#: Distance below which a point counts as on a plane [m].
PLANE_TOLERANCE_M: Final[float] = 1e-9

#: The modes of :func:`combine` (the scenario's ``reflections`` values).
REFLECTION_MODES: Final[tuple[str, ...]] = ("envelope", "coherent")

#: The keys of a ``[[reflector]]`` table.
REFLECTOR_KEYS: Final[tuple[str, ...]] = (
    "point_m",
    "normal",
    "material",
    "relative_permittivity",
    "conductivity_s_m",
    "reflection_coefficient",
    "name",
    "size_m",
    "up",
)


# --------------------------------------------------------------------------- Fresnel
def fresnel_coefficients(
    relative_permittivity: complex | NDArray, cos_incidence: ArrayLike
) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
    """Fresnel reflection coefficients of a planar half-space, incidence from air.

    Parameters
    ----------
    relative_permittivity : complex or ndarray
        Complex relative permittivity of the half-space, e^{+jwt} convention
        (imaginary part <= 0 for a lossy medium); broadcast against
        ``cos_incidence`` [1].
    cos_incidence : array_like
        Cosine of the angle of incidence from the normal, 0..1 (1 = normal
        incidence, 0 = grazing) [1].

    Returns
    -------
    gamma_perp : ndarray, complex
        TE coefficient, ratio of reflected to incident E perpendicular to the plane
        of incidence [1].
    gamma_par : ndarray, complex
        TM coefficient, ratio of reflected to incident H perpendicular to the plane
        of incidence (+1 for a perfect conductor) [1].

    Raises
    ------
    ValueError
        If a cosine lies outside 0..1 (beyond rounding).

    Notes
    -----
    With :math:`c = \\cos\\theta`, :math:`r = \\sqrt{\\varepsilon_r - 1 + c^2}`
    (principal root, Re r >= 0, so the transmitted wave decays):
    :math:`\\Gamma_\\perp = (c - r)/(c + r)` and
    :math:`\\Gamma_\\parallel = (\\varepsilon_r c - r)/(\\varepsilon_r c + r)`
    (Balanis [1]_ sec. 5.3 with :math:`\\mu_r = 1`; ITU-R P.2040 [2]_ sec. 2.2.1.5).
    The limits: :math:`\\Gamma_\\parallel = 0` at the Brewster angle
    :math:`\\tan\\theta_B = \\sqrt{\\varepsilon_r}` (lossless), both -> -1 at grazing
    incidence, and -> (-1, +1) as :math:`|\\varepsilon_r| \\to \\infty`.
    Exactly :math:`\\varepsilon_r = 1` (no interface) gives 0 at every angle.

    References
    ----------
    .. [1] C. A. Balanis, *Advanced Engineering Electromagnetics*, 2nd ed., Wiley,
       2012, sec. 5.3.1 (perpendicular) and 5.3.2 (parallel polarisation).
    .. [2] ITU-R P.2040-3 (08/2023), sec. 2.2.1.
    """
    c = np.asarray(cos_incidence, dtype=float)
    if np.any(~np.isfinite(c)) or np.any(c < -1e-9) or np.any(c > 1.0 + 1e-9):
        raise ValueError("cos_incidence must lie in 0..1")
    c = np.clip(c, 0.0, 1.0)  # rounding only: values beyond 1e-9 were refused above
    eps = np.asarray(relative_permittivity, dtype=complex)
    root = np.sqrt(eps - (1.0 - c) * (1.0 + c))
    num_perp, den_perp = c - root, c + root
    num_par, den_par = eps * c - root, eps * c + root
    with np.errstate(invalid="ignore", divide="ignore"):
        g_perp = np.where(den_perp != 0, num_perp / np.where(den_perp != 0, den_perp, 1), 0)
        g_par = np.where(den_par != 0, num_par / np.where(den_par != 0, den_par, 1), 0)
    return np.asarray(g_perp, dtype=complex), np.asarray(g_par, dtype=complex)


def normal_incidence_coefficient_from_permittivity(relative_permittivity: complex) -> complex:
    """E-field reflection coefficient at normal incidence, (1 - sqrt(eps))/(1 + sqrt(eps)).

    Parameters
    ----------
    relative_permittivity : complex
        Complex relative permittivity (e^{+jwt}) [1].

    Returns
    -------
    complex
        :math:`\\Gamma = (1 - \\sqrt{\\varepsilon_r})/(1 + \\sqrt{\\varepsilon_r})` [1].

    References
    ----------
    .. [1] C. A. Balanis, *Advanced Engineering Electromagnetics*, 2nd ed., 2012,
       sec. 5.2 (normal incidence, lossy media).
    """
    root = np.sqrt(complex(relative_permittivity))
    return complex((1.0 - root) / (1.0 + root))


# ------------------------------------------------------------------------- Reflector
@dataclass(frozen=True, eq=False)
class Reflector:
    """A reflecting plane: infinite, or a finite rectangle (``size_m``).

    Parameters
    ----------
    point_m : array_like, shape (3,)
        Any point on the plane [m].
    normal : array_like, shape (3,)
        Normal pointing to the side where the sources are; normalised here [1].
    material : str, optional
        An ITU-R P.2040 material name (see
        :data:`keepclear.fields.materials.MATERIAL_NAMES`); ``"metal"`` is a
        perfect conductor.
    relative_permittivity : float, optional
        Real relative permittivity of the half-space, >= 1 [1].
    conductivity_s_m : float, optional
        Its conductivity, >= 0 (default 0 with ``relative_permittivity``) [S m^-1].
    reflection_coefficient : float, optional
        A given normal-incidence E-field coefficient, -1..1, applied to both
        polarisations at all angles (-1 behaves as metal) [1].
    label : str
        Name used in messages.
    size_m : tuple of float, optional
        ``(width, height)`` of a finite rectangle centred on ``point_m`` [m]; None (the
        default) is an infinite plane.
    up : array_like, shape (3,), optional
        Direction of the rectangle's height edges, perpendicular to ``normal``; default
        +z, or +y when the normal is within about 25 degrees of vertical [1].

    Raises
    ------
    ModelInputError
        Naming the scenario key: not exactly one of the three forms, a value out of
        range, an unknown material, a zero normal, a size that is not two positive
        numbers, an ``up`` not perpendicular to the normal or given without ``size_m``.

    Notes
    -----
    Exactly one of ``material``, ``relative_permittivity`` (with
    ``conductivity_s_m``) or ``reflection_coefficient`` is given.  Instances are
    immutable (the arrays are read-only) and compare by identity.  A finite plate's
    width runs along ``width_axis = height_axis x normal``.
    """

    point_m: NDArray[np.float64]
    normal: NDArray[np.float64]
    material: str | None = None
    relative_permittivity: float | None = None
    conductivity_s_m: float | None = None
    reflection_coefficient: float | None = None
    label: str = "reflector"
    size_m: tuple[float, float] | None = None
    up: NDArray[np.float64] | None = None
    width_axis: NDArray[np.float64] | None = dataclass_field(init=False, repr=False, default=None)
    height_axis: NDArray[np.float64] | None = dataclass_field(init=False, repr=False, default=None)

    def __post_init__(self) -> None:
        self._init_geometry()
        self._init_size()

    def _init_size(self) -> None:
        if self.size_m is None:
            if self.up is not None:
                raise ModelInputError(
                    "up", "up is only for a finite reflector: give size_m = [width, height] too"
                )
            return
        size = np.asarray(self.size_m, dtype=float)
        if size.shape != (2,) or not np.all(np.isfinite(size)) or np.any(size <= 0):
            raise ModelInputError(
                "size_m",
                f"size_m must be [width, height], two numbers > 0 [m], got {self.size_m!r}",
            )
        n = self.normal
        if self.up is None:
            up = np.array([0.0, 0.0, 1.0]) if abs(n[2]) < 0.9 else np.array([0.0, 1.0, 0.0])
            up = up - np.dot(up, n) * n
        else:
            up = unit_vector(self.up, "up")
            if abs(float(np.dot(up, n))) > 1e-6:
                raise ModelInputError(
                    "up",
                    "up must be perpendicular to normal (it gives the direction of the height "
                    f"edges in the plane); the angle between them is "
                    f"{np.degrees(np.arccos(np.clip(abs(np.dot(up, n)), 0, 1))):.3g} degrees",
                )
            up = up - np.dot(up, n) * n
        v = up / np.linalg.norm(up)
        u = np.cross(v, n)
        for arr in (u, v):
            arr.setflags(write=False)
        object.__setattr__(self, "size_m", (float(size[0]), float(size[1])))
        object.__setattr__(self, "up", v)
        object.__setattr__(self, "width_axis", u)
        object.__setattr__(self, "height_axis", v)

    def _init_geometry(self) -> None:
        point = np.asarray(self.point_m, dtype=float)
        if point.shape != (3,) or not np.all(np.isfinite(point)):
            raise ModelInputError(
                "point_m", f"point_m must be three finite numbers, got {self.point_m!r}"
            )
        normal = unit_vector(self.normal, "normal")
        point = point.copy()
        point.setflags(write=False)
        normal.setflags(write=False)
        object.__setattr__(self, "point_m", point)
        object.__setattr__(self, "normal", normal)

        forms = [
            key
            for key, value in (
                ("material", self.material),
                ("relative_permittivity", self.relative_permittivity),
                ("reflection_coefficient", self.reflection_coefficient),
            )
            if value is not None
        ]
        if self.conductivity_s_m is not None and self.relative_permittivity is None:
            forms.append("conductivity_s_m")
        if not forms:
            raise ModelInputError(
                "material",
                "a reflector needs one of: material (an ITU-R P.2040 name or 'metal'), "
                "relative_permittivity with conductivity_s_m, or reflection_coefficient",
            )
        if len(forms) > 1:
            raise ModelInputError(
                forms[1],
                f"give only one of material, relative_permittivity (+ conductivity_s_m) or "
                f"reflection_coefficient; got both {forms[0]} and {forms[1]}",
            )
        if forms[0] == "conductivity_s_m":
            raise ModelInputError(
                "relative_permittivity",
                "conductivity_s_m needs relative_permittivity (the real part, >= 1)",
            )
        if self.material is not None:
            object.__setattr__(self, "material", canonical_material_name(self.material))
        if self.relative_permittivity is not None:
            eps = self.relative_permittivity
            if isinstance(eps, bool) or not np.isfinite(eps) or eps < 1.0:
                raise ModelInputError(
                    "relative_permittivity",
                    f"relative_permittivity must be a number >= 1, got {eps!r}",
                )
            sigma = 0.0 if self.conductivity_s_m is None else self.conductivity_s_m
            if isinstance(sigma, bool) or not np.isfinite(sigma) or sigma < 0.0:
                raise ModelInputError(
                    "conductivity_s_m",
                    f"conductivity_s_m must be a number >= 0 [S/m], got {sigma!r}",
                )
            object.__setattr__(self, "relative_permittivity", float(eps))
            object.__setattr__(self, "conductivity_s_m", float(sigma))
        if self.reflection_coefficient is not None:
            g = self.reflection_coefficient
            if isinstance(g, bool) or not np.isfinite(g) or not -1.0 <= g <= 1.0:
                raise ModelInputError(
                    "reflection_coefficient",
                    f"reflection_coefficient must be a real number in -1..1, got {g!r}",
                )
            object.__setattr__(self, "reflection_coefficient", float(g))

    # --------------------------------------------------------------- kind
    @property
    def kind(self) -> str:
        """``"metal"`` (perfect conductor), ``"dielectric"`` or ``"coefficient"``."""
        if self.material == "metal":
            return "metal"
        if self.reflection_coefficient is not None:
            return "coefficient"
        return "dielectric"

    @property
    def is_perfect_conductor(self) -> bool:
        """Whether the plane is a perfect conductor (``material = "metal"``)."""
        return self.kind == "metal"

    def permittivity(self, frequency_hz: float) -> complex | None:
        """Complex relative permittivity of the half-space (None for metal or a given Gamma).

        Parameters
        ----------
        frequency_hz : float
            Frequency [Hz].

        Returns
        -------
        complex or None
            :math:`\\eta' - j\\sigma/(2\\pi f \\varepsilon_0)` [1].
        """
        if self.kind != "dielectric":
            return None
        if self.material is not None:
            return relative_permittivity_itu_p2040(self.material, frequency_hz, warn=False)
        assert self.relative_permittivity is not None and self.conductivity_s_m is not None
        return complex_permittivity(self.relative_permittivity, self.conductivity_s_m, frequency_hz)

    # -------------------------------------------------------- coefficients
    def coefficients(
        self, frequency_hz: float, cos_incidence: ArrayLike
    ) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
        """(gamma_perp, gamma_par) at the given incidence cosines.

        Parameters
        ----------
        frequency_hz : float
            Frequency [Hz].
        cos_incidence : array_like
            Cosine of the incidence angle, 0..1 [1].

        Returns
        -------
        gamma_perp, gamma_par : ndarray, complex
            In the convention of :func:`fresnel_coefficients`: metal gives
            (-1, +1), a given Gamma gives (Gamma, -Gamma) [1].
        """
        c = np.asarray(cos_incidence, dtype=float)
        if self.kind == "metal":
            return np.full(c.shape, -1.0 + 0j), np.full(c.shape, 1.0 + 0j)
        if self.kind == "coefficient":
            g = float(self.reflection_coefficient)  # type: ignore[arg-type]
            return np.full(c.shape, g + 0j), np.full(c.shape, -g + 0j)
        eps = self.permittivity(frequency_hz)
        assert eps is not None
        return fresnel_coefficients(eps, c)

    def image_factors(
        self, frequency_hz: float, cos_incidence: ArrayLike
    ) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
        """Factors (a_s, a_p) = (-gamma_perp, gamma_par) that scale the conductor image.

        Parameters
        ----------
        frequency_hz : float
            Frequency [Hz].
        cos_incidence : array_like
            Cosine of the incidence angle, 0..1 [1].

        Returns
        -------
        a_s, a_p : ndarray, complex
            1 and 1 for a perfect conductor [1].
        """
        g_perp, g_par = self.coefficients(frequency_hz, cos_incidence)
        return -g_perp, g_par

    def normal_incidence_coefficient(self, frequency_hz: float) -> complex:
        """E-field reflection coefficient at normal incidence (-1 for metal).

        Parameters
        ----------
        frequency_hz : float
            Frequency [Hz].

        Returns
        -------
        complex
            :math:`(1 - \\sqrt{\\varepsilon_r})/(1 + \\sqrt{\\varepsilon_r})`, or the
            given coefficient [1].
        """
        if self.kind == "metal":
            return -1.0 + 0j
        if self.kind == "coefficient":
            return complex(float(self.reflection_coefficient))  # type: ignore[arg-type]
        eps = self.permittivity(frequency_hz)
        assert eps is not None
        return normal_incidence_coefficient_from_permittivity(eps)

    def transmitted_power_fraction(
        self, frequency_hz: float, cos_incidence: ArrayLike
    ) -> NDArray[np.float64]:
        """Power fraction that enters the half-space, 1 - |Gamma|^2 (the larger polarisation).

        Parameters
        ----------
        frequency_hz : float
            Frequency [Hz].
        cos_incidence : array_like
            Cosine of the incidence angle, 0..1 [1].

        Returns
        -------
        ndarray
            :math:`\\max(1 - |\\Gamma_\\perp|^2, 1 - |\\Gamma_\\parallel|^2)`; 0 for
            metal [1].

        Notes
        -----
        The polarisation of the ray is not tracked, so the polarisation that
        transmits more is taken (conservative for the field behind the plane).
        By energy conservation the power that is not reflected enters the
        half-space (P.2040-3 sec. 2.2.1.4); absorption in a real wall's thickness
        is ignored (the half-space has none).
        """
        c = np.asarray(cos_incidence, dtype=float)
        if self.kind == "metal":
            return np.zeros(c.shape)
        g_perp, g_par = self.coefficients(frequency_hz, c)
        t = np.maximum(1.0 - np.abs(g_perp) ** 2, 1.0 - np.abs(g_par) ** 2)
        return np.clip(t, 0.0, 1.0)

    # ------------------------------------------------------------ geometry
    @functools.cached_property
    def mirror_matrix(self) -> NDArray[np.float64]:
        """Reflection matrix M = I - 2 n n^T (symmetric, det -1) [1]; read-only."""
        n = self.normal
        m = np.eye(3) - 2.0 * np.outer(n, n)
        m.setflags(write=False)
        return m

    def signed_distance_m(self, points_m: ArrayLike) -> NDArray[np.float64]:
        """Signed distance of points (N, 3) from the plane, > 0 on the source side [m]."""
        pts = as_points(points_m)
        return (pts - self.point_m) @ self.normal

    def mirror_points(self, points_m: ArrayLike) -> NDArray[np.float64]:
        """Mirror images of points (N, 3) in the plane [m]."""
        pts = as_points(points_m)
        d = (pts - self.point_m) @ self.normal
        return pts - 2.0 * d[:, None] * self.normal

    # ------------------------------------------------------- finite plate
    @property
    def is_finite(self) -> bool:
        """Whether this is a finite rectangle (``size_m`` given)."""
        return self.size_m is not None

    @property
    def is_obstacle(self) -> bool:
        """Whether the plate blocks rays that cross it: a finite metal plate.

        A non-metal plate, like a non-metal infinite plane, passes the direct ray in
        full (its thickness is unknown; conservative).
        """
        return self.is_finite and self.kind == "metal"

    def corners(self) -> NDArray[np.float64]:
        """The four corners (4, 3) of a finite plate, in order around it [m].

        Raises
        ------
        ValueError
            For an infinite plane (it has none).
        """
        if self.size_m is None or self.width_axis is None or self.height_axis is None:
            raise ValueError(f"{self.label}: an infinite plane has no corners")
        hw, hh = self.size_m[0] / 2, self.size_m[1] / 2
        u, v, c = self.width_axis, self.height_axis, self.point_m
        return np.array(
            [c - hw * u - hh * v, c + hw * u - hh * v, c + hw * u + hh * v, c - hw * u + hh * v]
        )

    def outline(self) -> NDArray[np.float64] | None:
        """Corners (4, 3) of a finite plate for drawing, in order around it [m].

        None for an infinite plane, which is drawn as its trace through :attr:`point_m`
        with :attr:`normal`.
        """
        return self.corners() if self.is_finite else None

    def _crossing(
        self, start_m: NDArray[np.float64], end_m: NDArray[np.float64], frequency_hz: float
    ) -> diffraction.RectangleCrossing:
        assert self.size_m is not None and self.width_axis is not None
        assert self.height_axis is not None
        return diffraction.rectangle_crossing(
            start_m,
            end_m,
            self.point_m,
            self.normal,
            self.width_axis,
            self.height_axis,
            self.size_m[0] / 2,
            self.size_m[1] / 2,
            C_M_S / frequency_hz,
        )

    def aperture_factor(
        self, start_m: ArrayLike, end_m: ArrayLike, frequency_hz: float
    ) -> NDArray[np.complex128]:
        """Fresnel-Kirchhoff factor of the plate on unfolded reflected rays start -> end.

        Parameters
        ----------
        start_m : array_like, shape (N, 3)
            The image point of the path (the source mirrored in this plane, and in the
            planes of any earlier bounces) [m].
        end_m : array_like, shape (N, 3)
            The field point (unfolded through any later bounces) [m].
        frequency_hz : float
            Frequency [Hz].

        Returns
        -------
        ndarray, complex, shape (N,)
            1 for an infinite plane; for a plate the rectangular-aperture factor A of
            :func:`~keepclear.fields.diffraction.rectangle_aperture_factor` (about 1
            where the specular point lies well inside the plate, 1/2 on its edge,
            falling off outside), 0 where the ray does not cross the plane [1].
        """
        start = as_points(start_m)
        end = as_points(end_m)
        if not self.is_finite:
            return np.ones(end.shape[0], dtype=complex)
        geo = self._crossing(np.broadcast_to(start, end.shape), end, frequency_hz)
        out = np.zeros(end.shape[0], dtype=complex)
        if geo.crossing.any():
            out[geo.crossing] = diffraction.rectangle_aperture_factor(geo.nu[:, geo.crossing])
        return out

    def obstacle_factor(
        self,
        start_m: ArrayLike,
        end_m: ArrayLike,
        frequency_hz: float,
        source_extent_m: float = 0.0,
    ) -> NDArray[np.float64]:
        """Amplitude factor of the plate as an obstacle on straight rays start -> end.

        Parameters
        ----------
        start_m : array_like, shape (3,) or (N, 3)
            The ray's origin (a source, or a reflection point) [m].
        end_m : array_like, shape (N, 3)
            Field points [m].
        frequency_hz : float
            Frequency [Hz].
        source_extent_m : float
            Half-size of the source: the largest factor over the corners of a cube of
            this half-size about the origin [m].

        Returns
        -------
        ndarray, shape (N,)
            1 for an infinite plane, a non-metal plate, or a ray that does not cross the
            plate's plane; else the opaque-plate factor of
            :func:`~keepclear.fields.diffraction.obstacle_factor` (the plate passes
            nothing itself; its edges diffract), continuous across the shadow
            boundary [1].
        """
        end = as_points(end_m)
        out = np.ones(end.shape[0])
        if not self.is_obstacle:
            return out
        start = np.broadcast_to(np.asarray(start_m, dtype=float).reshape(-1, 3), end.shape)
        axes = np.column_stack([self.width_axis, self.height_axis, self.normal])
        offsets = diffraction.cube_offsets(float(source_extent_m), axes)

        def factor(starts: NDArray[np.float64], ends: NDArray[np.float64]) -> NDArray:
            geo = self._crossing(starts, ends, frequency_hz)
            f = np.ones(starts.shape[0])
            if geo.crossing.any():
                f[geo.crossing] = diffraction.obstacle_factor(geo.nu[:, geo.crossing])
            return f

        return diffraction.largest_over_corners(
            factor, start, end, offsets, plane=(self.point_m, self.normal)
        )


# ------------------------------------------------------------------ image method
def _check_source_side(
    reflectors: Sequence[ReflectorModel], position_m: NDArray[np.float64]
) -> None:
    for r in reflectors:
        d = float(r.signed_distance_m(position_m)[0])
        if d < -PLANE_TOLERANCE_M:
            raise ModelInputError(
                "normal",
                f"{r.label}: a source at {position_m.tolist()} is {-d:.4g} m behind the plane; "
                "the normal must point to the side where the sources are",
            )


def _accessible(
    reflectors: Sequence[ReflectorModel],
    points_m: NDArray[np.float64],
    exclude: Sequence[int],
    distances_m: Sequence[NDArray[np.float64]] | None = None,
) -> NDArray[np.bool_]:
    """Points on the source side (or on) every infinite plane not in ``exclude``.

    Finite plates do not bound the space: rays pass beside them.  ``distances_m``, when
    given, are the points' signed distances from each plane, already computed.
    """
    ok = np.ones(points_m.shape[0], dtype=bool)
    for k, r in enumerate(reflectors):
        if k not in exclude and not r.is_finite:
            d = r.signed_distance_m(points_m) if distances_m is None else distances_m[k]
            ok &= d >= -PLANE_TOLERANCE_M
    return ok


def _crossing_either_way(
    reflector: ReflectorModel,
    start_m: NDArray[np.float64],
    end_m: NDArray[np.float64],
    end_distance_m: NDArray[np.float64] | None = None,
) -> tuple[NDArray[np.float64], NDArray[np.bool_]]:
    """Where segments with ends on opposite sides (or on) of the plane meet it."""
    d0 = reflector.signed_distance_m(start_m)
    d1 = reflector.signed_distance_m(end_m) if end_distance_m is None else end_distance_m
    span = d0 - d1
    good = (d0 * d1 <= PLANE_TOLERANCE_M**2) & (np.abs(span) > 0)
    t = np.clip(np.where(good, d0 / np.where(good, span, 1.0), 0.0), 0.0, 1.0)
    return start_m + t[:, None] * (end_m - start_m), good


def _crossing(
    reflector: ReflectorModel,
    start_m: NDArray[np.float64],
    end_m: NDArray[np.float64],
    end_distance_m: NDArray[np.float64] | None = None,
) -> tuple[NDArray[np.float64], NDArray[np.bool_]]:
    """Where segments from ``start`` (far side or on) to ``end`` (near side) meet the plane.

    ``end_distance_m``, when given, is the ends' signed distance from the plane.
    """
    d0 = reflector.signed_distance_m(start_m)
    d1 = reflector.signed_distance_m(end_m) if end_distance_m is None else end_distance_m
    span = d1 - d0
    good = (d0 <= PLANE_TOLERANCE_M) & (d1 >= -PLANE_TOLERANCE_M) & (span > 0)
    t = np.where(good, -d0 / np.where(good, span, 1.0), 0.0)
    t = np.clip(t, 0.0, 1.0)
    points = start_m + t[:, None] * (end_m - start_m)
    # Start and end both on the plane: any point of the segment; take the end.
    both_on = (np.abs(d0) <= PLANE_TOLERANCE_M) & (np.abs(d1) <= PLANE_TOLERANCE_M)
    points = np.where(both_on[:, None], end_m, points)
    return points, good | both_on


def _image_transform(
    e0: NDArray[np.complex128],
    h0: NDArray[np.complex128],
    points_m: NDArray[np.float64],
    reference_m: NDArray[np.float64],
    reflector: ReflectorModel,
    frequency_hz: float,
) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
    """The reflected field at points p, given the incident field at the mirrored points.

    With ``e0, h0`` the field of a source (reference point ``reference_m``, (3,), or one
    a point, (N, 3)) at
    :math:`\\mathcal M p`, this is the conductor image
    :math:`(-M E(\\mathcal M p), M H(\\mathcal M p))` scaled per polarisation by the
    plane's factors at the angle of the ray from the image reference point
    :math:`\\mathcal M s` to p.  No masking is done here.
    """
    m = reflector.mirror_matrix
    n = reflector.normal
    e_img = -(e0 @ m)  # M is symmetric: rows @ M == (M @ rows.T).T
    h_img = h0 @ m
    if reflector.is_perfect_conductor:
        return e_img, h_img
    image_ref = reflector.mirror_points(np.reshape(reference_m, (-1, 3)))
    ray = points_m - image_ref
    dist = row_norms(ray)
    safe = np.where(dist > 0, dist, 1.0)
    cos = np.where(dist > 0, np.abs(ray @ n) / safe, 1.0)
    a_s, a_p = reflector.image_factors(frequency_hz, np.clip(cos, 0.0, 1.0))
    if reflector.kind == "coefficient":
        return e_img * a_s[:, None], h_img * a_s[:, None]
    # n x ray, written out (np.cross's own products and differences, without its checks)
    s_hat = np.column_stack(
        [
            n[1] * ray[:, 2] - n[2] * ray[:, 1],
            n[2] * ray[:, 0] - n[0] * ray[:, 2],
            n[0] * ray[:, 1] - n[1] * ray[:, 0],
        ]
    )
    s_norm = row_norms(s_hat)
    ok = s_norm > 1e-12 * np.maximum(dist, 1e-300)
    s_hat = s_hat / np.where(ok, s_norm, 1.0)[:, None]
    if not ok.all():
        # At normal incidence a_s == a_p, so any direction across the normal will do.
        fallback = np.cross(n, [1.0, 0.0, 0.0] if abs(n[0]) < 0.9 else [0.0, 1.0, 0.0])
        s_hat[~ok] = fallback / np.linalg.norm(fallback)
    es = np.sum(e_img * s_hat, axis=1)
    hs = np.sum(h_img * s_hat, axis=1)
    e_r = a_p[:, None] * e_img + ((a_s - a_p) * es)[:, None] * s_hat
    h_r = a_s[:, None] * h_img + ((a_p - a_s) * hs)[:, None] * s_hat
    return e_r, h_r


def image_labels(reflectors: Sequence[ReflectorModel], order: int = 1) -> list[str]:
    """Labels of the images :func:`reflected_fields` returns, in the same order.

    Parameters
    ----------
    reflectors : sequence of Reflector
        The planes.
    order : int
        1 or 2.

    Returns
    -------
    list of str
        ``"floor"`` for a first-order image, ``"floor>wall"`` for the image with
        its first bounce on ``floor`` and its last on ``wall``.
    """
    labels = [r.label for r in reflectors]
    if order >= 2:
        labels += [
            f"{ri.label}>{rj.label}"
            for i, ri in enumerate(reflectors)
            for j, rj in enumerate(reflectors)
            if i != j
        ]
    return labels


def reflected_fields(
    radiator: Radiator,
    reflectors: Sequence[ReflectorModel],
    points_m: ArrayLike,
    frequency_hz: float,
    order: int = 1,
) -> list[tuple[NDArray[np.complex128], NDArray[np.complex128]]]:
    """Reflected E and H of one radiator at points, one pair per image.

    Parameters
    ----------
    radiator : Radiator
        Any source model; its ``fields`` are evaluated at mirrored points.
    reflectors : sequence of Reflector
        The planes; the radiator's reference point must be on (or in front of)
        each plane's source side.
    points_m : array_like, shape (N, 3)
        Field points [m].
    frequency_hz : float
        Frequency for the material coefficients [Hz].
    order : int
        1: one image per plane.  2: also one image per ordered pair (i, j) of
        distinct planes (first bounce on i, last on j).

    Returns
    -------
    list of (e_v_m, h_a_m)
        Complex RMS E [V/m] and H [A/m], each (N, 3), in the order of
        :func:`image_labels`: first-order images in plane order, then the pairs
        (i, j) in row-major order.  Zero where the image's path does not exist
        and at points behind any plane.

    Raises
    ------
    ModelInputError
        (parameter ``normal``) if the radiator's reference point is behind a plane.
    ValueError
        If ``order`` is not 1 or 2.

    Notes
    -----
    First order in plane j: :math:`E_j = \\mathcal R_j[E]`, the image operator of
    the module docstring with reference point :math:`s_j = \\mathcal M_j s`.
    Second order (i, j): :math:`E_{ij} = \\mathcal R_j[\\mathcal R_i[E]]`, image
    point :math:`s_{ij} = \\mathcal M_j \\mathcal M_i s`; the last reflection point
    :math:`Q_j` is where the segment :math:`s_{ij} \\to p` meets plane j, the first
    :math:`Q_i` where :math:`s_i \\to Q_j` meets plane i; the inner operator is
    evaluated at :math:`\\mathcal M_j p`, on the ray :math:`s_i \\to Q_j`, so each
    plane's coefficient is taken at its own angle.  The image exists where p and
    every reflection point are on the accessible side of all planes, and (second
    order) :math:`s_i` is on the source side of plane j.
    """
    return _fields_and_images(radiator, reflectors, points_m, frequency_hz, order, False)[2]


def direct_and_reflected_fields(
    radiator: Radiator,
    reflectors: Sequence[ReflectorModel],
    points_m: ArrayLike,
    frequency_hz: float,
    order: int = 1,
    chunk_bytes: int | None = None,
) -> tuple[NDArray[np.complex128], NDArray[np.complex128], list[tuple[NDArray, NDArray]]]:
    """The radiator's own E and H at points, and :func:`reflected_fields`, in one go.

    The same values as ``radiator_fields(radiator, points_m)`` and
    :func:`reflected_fields`; the radiator is asked once, for the points and every
    image's mirrored points together (one call costs the same fixed work as another,
    whatever its size).  ``chunk_bytes`` is the radiator's memory budget for one chunk.

    Returns
    -------
    e_v_m, h_a_m : ndarray, shape (N, 3), complex
        The direct field [V/m], [A/m].
    images : list of (e_v_m, h_a_m)
        As :func:`reflected_fields` returns them.
    """
    e, h, images = _fields_and_images(
        radiator, reflectors, points_m, frequency_hz, order, True, chunk_bytes
    )
    assert e is not None and h is not None  # asked for (direct=True)
    return e, h, images


def _pieces(array: NDArray, lengths: Sequence[int]) -> list[NDArray]:
    """``array`` cut along its first axis into consecutive pieces of ``lengths`` (views)."""
    out, start = [], 0
    for n in lengths:
        out.append(array[start : start + n])
        start += n
    return out


def _repeat_rows(points: Sequence[NDArray], counts: Sequence[int]) -> NDArray[np.float64]:
    """Each of ``points`` (one point, (3,) or (1, 3)) repeated ``counts`` times, (sum, 3)."""
    return np.repeat(np.vstack([np.reshape(p, (1, 3)) for p in points]), counts, axis=0)


def _aperture_factors(
    reflectors: Sequence[ReflectorModel],
    asked: Sequence[tuple[int, NDArray[np.float64], NDArray[np.float64]]],
    frequency_hz: float,
) -> list[NDArray[np.complex128]]:
    """:meth:`Reflector.aperture_factor` for each (plate, start, ends) asked, in order.

    The rays asked of one plate go to it in one call; each ray's factor is computed on its
    own, so the values equal those of separate calls.
    """
    out: list[NDArray[np.complex128]] = [np.empty(0, dtype=complex)] * len(asked)
    for plate in sorted({k for k, _, _ in asked}):
        mine = [n for n, (k, _, _) in enumerate(asked) if k == plate]
        ends = [asked[n][2] for n in mine]
        starts = _repeat_rows([asked[n][1] for n in mine], [len(end) for end in ends])
        a = reflectors[plate].aperture_factor(starts, np.vstack(ends), frequency_hz)
        for n, part in zip(mine, _pieces(a, [len(end) for end in ends]), strict=True):
            out[n] = part
    return out


def _fields_and_images(  # noqa: PLR0913
    radiator: Radiator,
    reflectors: Sequence[ReflectorModel],
    points_m: ArrayLike,
    frequency_hz: float,
    order: int,
    direct: bool,
    chunk_bytes: int | None = None,
) -> tuple[NDArray | None, NDArray | None, list[tuple[NDArray, NDArray]]]:
    """The direct field (``direct``) and the images of :func:`reflected_fields`.

    First the paths: where each image exists and the points at which it needs the
    source's field (the field point mirrored in its last plane, then in its first);
    then one evaluation of the radiator at all of them; then each image's conductor
    image and plane factors (:func:`_image_transform`, last plane outermost) and the
    plates' aperture factors.
    """
    if order not in (1, 2):
        raise ValueError(f"order must be 1 or 2, got {order!r}")
    pts = as_points(points_m)
    refl = tuple(reflectors)
    n_pts = pts.shape[0]
    source = np.asarray(radiator.position_m, dtype=float)
    _check_source_side(refl, source[None, :])
    # the points' signed distances from each plane, used by every image
    heights = [r.signed_distance_m(pts) for r in refl]
    inside = _accessible(refl, pts, exclude=(), distances_m=heights)
    first_refs = [r.mirror_points(source[None, :]) for r in refl]

    # (first plane i or None, last plane j, where the image exists, points in plane j)
    paths: list[tuple[int | None, int, NDArray[np.bool_] | None]] = []
    valid: NDArray[np.bool_] | None
    for j, rj in enumerate(refl):
        q_j, met = _crossing(rj, first_refs[j], pts, heights[j])  # one start for all
        paths.append((None, j, inside & met & _accessible(refl, q_j, exclude=(j,))))
    if order == 2:
        for i, ri in enumerate(refl):
            s_i = first_refs[i]
            for j, rj in enumerate(refl):
                if i == j:
                    continue
                valid = None
                d_ij = float(rj.signed_distance_m(s_i)[0])
                # an infinite plane reflects on its source side only; a plate on both faces
                if d_ij > PLANE_TOLERANCE_M or (rj.is_finite and d_ij < -PLANE_TOLERANCE_M):
                    s_ij = rj.mirror_points(s_i)
                    q_j, met_j = _crossing_either_way(rj, s_ij, pts, heights[j])
                    valid = inside & met_j & _accessible(refl, q_j, exclude=(j,))
                    q_i, met_i = _crossing(ri, s_i, q_j)
                    valid &= met_i & _accessible(refl, q_i, exclude=(i,))
                paths.append((i, j, valid))

    # the source's field: at the points, and at each image's points mirrored in its last
    # plane (``in_plane``), then in its first
    where: dict[int, NDArray[np.bool_]] = {}  # the points where each image exists
    in_plane: dict[int, NDArray[np.float64]] = {}
    wanted = [pts] if direct else []
    for k, (first, last, valid) in enumerate(paths):
        if valid is not None and valid.any():
            where[k] = valid
            in_plane[k] = refl[last].mirror_points(pts[valid])
            wanted.append(in_plane[k] if first is None else refl[first].mirror_points(in_plane[k]))
    e_direct = h_direct = None
    arriving: dict[int, tuple[NDArray, NDArray]] = {}  # the field each image reflects
    if wanted:
        args = () if chunk_bytes is None else (chunk_bytes,)
        e_all, h_all = radiator_fields(radiator, np.vstack(wanted), *args)
        lengths = [len(w) for w in wanted]
        e_parts, h_parts = _pieces(e_all, lengths), _pieces(h_all, lengths)
        if direct:
            e_direct, h_direct = e_parts.pop(0), h_parts.pop(0)
        arriving = dict(zip(in_plane, zip(e_parts, h_parts, strict=True), strict=True))

    def by_plane(
        plane_of: dict[int, int], points: dict[int, NDArray], reference: dict[int, NDArray]
    ) -> None:
        """Each plane's conductor image and factors, once for every image bouncing there."""
        groups: dict[int, list[int]] = {}
        for k, plane in plane_of.items():
            groups.setdefault(plane, []).append(k)
        for plane, members in groups.items():
            e, h = _image_transform(
                np.vstack([arriving[k][0] for k in members]),
                np.vstack([arriving[k][1] for k in members]),
                np.vstack([points[k] for k in members]),
                _repeat_rows([reference[k] for k in members], [len(points[k]) for k in members]),
                refl[plane],
                frequency_hz,
            )
            lengths = [len(points[k]) for k in members]
            parts = zip(_pieces(e, lengths), _pieces(h, lengths), strict=True)
            arriving.update(zip(members, parts, strict=True))

    # first the first bounce of the second-order images, at their points mirrored in the
    # last plane (the reference: the source); then every image's last bounce, at the field
    # points (the reference: the source, or its image in the first plane)
    firsts = {k: first for k, (first, _, _) in enumerate(paths) if k in arriving}
    by_plane(
        {k: first for k, first in firsts.items() if first is not None},
        in_plane,
        {k: source for k in arriving},
    )
    by_plane(
        {k: paths[k][1] for k in arriving},
        {k: pts[where[k]] for k in arriving},
        {k: source if first is None else first_refs[first][0] for k, first in firsts.items()},
    )

    images: list[tuple[NDArray, NDArray]] = []
    # the plates' aperture factors, asked of each plate once: (plate, start, ends) per use
    asked: list[tuple[int, NDArray[np.float64], NDArray[np.float64]]] = []
    uses: list[tuple[int, list[int]]] = []  # (image, indices into asked, in product order)
    for k, (first, last, _) in enumerate(paths):
        e = np.zeros((n_pts, 3), dtype=complex)
        h = np.zeros((n_pts, 3), dtype=complex)
        if k in arriving:
            valid = where[k]
            e[valid], h[valid] = arriving[k]
            rj = refl[last]
            factors = []
            if first is None:
                if rj.is_finite:
                    factors.append(len(asked))
                    asked.append((last, first_refs[last], pts[valid]))
            else:
                ri, s_i = refl[first], first_refs[first]
                if rj.is_finite:  # last bounce: the unfolded ray s_ij -> p
                    factors.append(len(asked))
                    asked.append((last, rj.mirror_points(s_i), pts[valid]))
                if ri.is_finite:  # first bounce: the unfolded ray s_i -> M_j p
                    factors.append(len(asked))
                    asked.append((first, s_i, in_plane[k]))
            if factors:
                uses.append((len(images), factors))
        images.append((e, h))
    answers = _aperture_factors(refl, asked, frequency_hz)
    for k, factors in uses:
        valid = where[k]
        a = answers[factors[0]]
        for f in factors[1:]:
            a = a * answers[f]
        e, h = images[k]
        e[valid] *= a[:, None]
        h[valid] *= a[:, None]
    return e_direct, h_direct, images


def behind(reflectors: Sequence[ReflectorModel], points_m: ArrayLike) -> NDArray[np.bool_]:
    """Whether each point (N, 3) is on the far side of any infinite reflector (N,) bool.

    Points on a plane (within :data:`PLANE_TOLERANCE_M`) are not behind it.  Finite
    plates are never "behind": rays pass beside them, and a metal plate's shadow is
    :func:`plate_obstacle_factor`.
    """
    pts = as_points(points_m)
    return ~_accessible(tuple(reflectors), pts, exclude=())


def transmission_power_factor(
    reflectors: Sequence[ReflectorModel],
    radiator_position_m: ArrayLike,
    points_m: ArrayLike,
    frequency_hz: float,
) -> NDArray[np.float64]:
    """Power fraction of the direct ray that reaches points behind planes (N,).

    Parameters
    ----------
    reflectors : sequence of Reflector
        The planes.
    radiator_position_m : array_like, shape (3,)
        The source's reference point, on the source side of every plane [m].
    points_m : array_like, shape (N, 3)
        Field points [m].
    frequency_hz : float
        Frequency [Hz].

    Returns
    -------
    ndarray, shape (N,)
        1 in front of every plane; behind, the product over the planes the direct
        ray crosses of :math:`1 - |\\Gamma|^2` at that ray's incidence angle (the
        polarisation that transmits more); 0 behind metal [1].

    Raises
    ------
    ModelInputError
        (parameter ``normal``) if the source is behind a plane.

    Notes
    -----
    :math:`T = 1 - |\\Gamma(\\theta)|^2` is the power that enters a half-space
    (P.2040-3 sec. 2.2.1.4, energy conservation).  Absorption in the wall's
    thickness is ignored: the half-space model has no thickness, so this is
    conservative for thick or lossy walls (a 200 mm concrete wall transmits far
    less).  It is *not* an upper bound for a thin low-loss panel near a
    half-wave resonance, which can transmit almost everything (P.2040-3
    sec. 2.2.2, slab formulas).
    """
    pts = as_points(points_m)
    source = np.asarray(radiator_position_m, dtype=float).reshape(1, 3)
    refl = tuple(reflectors)
    _check_source_side(refl, source)
    factor = np.ones(pts.shape[0])
    ray = pts - source
    dist = np.linalg.norm(ray, axis=1)
    for r in refl:
        if r.is_finite:  # a plate's shadow is plate_obstacle_factor's
            continue
        crossing = r.signed_distance_m(pts) < -PLANE_TOLERANCE_M
        if not crossing.any():
            continue
        cos = np.abs(ray[crossing] @ r.normal) / dist[crossing]
        factor[crossing] *= r.transmitted_power_fraction(frequency_hz, np.clip(cos, 0.0, 1.0))
    return factor


def plate_obstacle_factor(
    reflectors: Sequence[ReflectorModel],
    start_m: ArrayLike,
    end_m: ArrayLike,
    frequency_hz: float,
    exclude: Sequence[int] = (),
    source_extent_m: float = 0.0,
) -> NDArray[np.float64]:
    """Product of the finite metal plates' obstacle factors on straight rays (N,).

    Parameters
    ----------
    reflectors : sequence of Reflector
        The scenario's reflectors; only finite metal plates (:attr:`Reflector.is_obstacle`)
        not in ``exclude`` count.
    start_m : array_like, shape (3,) or (N, 3)
        Ray origins: a source, or the reflection points of a reflected path [m].
    end_m : array_like, shape (N, 3)
        Ray ends [m].
    frequency_hz : float
        Frequency [Hz].
    exclude : sequence of int
        Indices of plates not to count (the plate a leg ends or starts on).
    source_extent_m : float
        Half-size of the source (see :meth:`Reflector.obstacle_factor`) [m].

    Returns
    -------
    ndarray, shape (N,)
        1 where no metal plate is crossed; continuous across each shadow boundary [1].
    """
    end = as_points(end_m)
    out = np.ones(end.shape[0])
    for k, r in enumerate(reflectors):
        if r.is_obstacle and k not in exclude:
            out *= r.obstacle_factor(start_m, end, frequency_hz, source_extent_m)
    return out


def has_obstacles(reflectors: Sequence[ReflectorModel]) -> bool:
    """Whether any reflector is a finite metal plate (an obstacle for rays)."""
    return any(r.is_obstacle for r in reflectors)


# -------------------------------------------------------------------- combination
def combine(
    e_direct: NDArray[np.complex128],
    h_direct: NDArray[np.complex128],
    images: Sequence[tuple[NDArray[np.complex128], NDArray[np.complex128]]],
    mode: str,
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """|E|^2 and |H|^2 of the direct field plus its images.

    Parameters
    ----------
    e_direct, h_direct : ndarray, shape (N, 3), complex
        Direct E [V/m] and H [A/m].
    images : sequence of (e, h)
        Image fields as returned by :func:`reflected_fields` [V/m], [A/m].
    mode : str
        ``"coherent"``: phasors summed (the standing-wave pattern).
        ``"envelope"``: magnitudes summed, the worst phase at every point.

    Returns
    -------
    e_sq_v2_m2 : ndarray, shape (N,)
        :math:`|E|^2` [V^2 m^-2].
    h_sq_a2_m2 : ndarray, shape (N,)
        :math:`|H|^2` [A^2 m^-2].

    Raises
    ------
    ValueError
        For an unknown mode.

    Notes
    -----
    Coherent: :math:`|E_d + \\sum_k E_k|^2`.  Envelope:
    :math:`(|E_d| + \\sum_k |E_k|)^2`, which is never below the coherent value
    (triangle inequality) and equals :math:`(1 + |\\Gamma|)^2 |E_d|^2` for one
    image of relative strength :math:`|\\Gamma|` (the contract's definition).
    """
    if mode == "coherent":
        e = np.array(e_direct, dtype=complex, copy=True)
        h = np.array(h_direct, dtype=complex, copy=True)
        for ei, hi in images:
            e += ei
            h += hi
        return np.sum(np.abs(e) ** 2, axis=1), np.sum(np.abs(h) ** 2, axis=1)
    if mode == "envelope":
        # every field's row lengths in one call, added in the images' order
        n = e_direct.shape[0]
        e_mags = row_norms(np.concatenate([e_direct, *(ei for ei, _ in images)]))
        h_mags = row_norms(np.concatenate([h_direct, *(hi for _, hi in images)]))
        e_mag, h_mag = e_mags[:n], h_mags[:n]
        for k in range(1, len(images) + 1):
            e_mag = e_mag + e_mags[k * n : (k + 1) * n]
            h_mag = h_mag + h_mags[k * n : (k + 1) * n]
        return e_mag**2, h_mag**2
    raise ValueError(f"mode must be one of {', '.join(REFLECTION_MODES)}, got {mode!r}")


__all__ = [
    "PLANE_TOLERANCE_M",
    "REFLECTION_MODES",
    "REFLECTOR_KEYS",
    "Reflector",
    "behind",
    "combine",
    "direct_and_reflected_fields",
    "fresnel_coefficients",
    "has_obstacles",
    "image_labels",
    "normal_incidence_coefficient_from_permittivity",
    "plate_obstacle_factor",
    "reflected_fields",
    "transmission_power_factor",
]
