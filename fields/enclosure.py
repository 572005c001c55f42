"""A leaky metal box around the sources: the ``[enclosure]`` power-balance model.

Method (Hill et al. 1994, the power balance of an electrically large cavity)
--------------------------------------------------------------------------
Inside an electrically large, well-stirred metal box the field is a diffuse mixture of
plane waves, described by one number, the *scalar power density* S_c [W m^-2] (the
plane-wave-equivalent density |E|^2 / eta0 averaged over the volume).  Every loss is
written as a cross section sigma_i with P_i = sigma_i S_c, and in the steady state

    P_in = S_c (sigma_walls + sigma_load + sigma_wall_transmission + sum_i sigma_i),

so each opening leaks P_i = sigma_i / sigma_total x P_in and the quality factor is
Q = 2 pi V / (lambda sigma_total).  The terms:

* walls: sigma_walls = 4 pi mu_r delta A / (3 lambda) (Hill eq. for Q1 = 3V/(2 mu_r A delta),
  the mode-averaged wall loss; Liu et al.'s small correction, which adds loss, is
  left out);
* an opening: half its average transmission cross section <sigma_l> (the cavity
  field reaches it from one side only), times its own depth or screen transmission.
  <sigma_l> is Hill's small-aperture form (4 k^4 / 9 pi)(alpha_e^2 + alpha_m1^2 +
  alpha_m2^2) for small openings and A/2 for large ones; in between keepclear takes a
  conservative resonance envelope (see :func:`aperture_transmission_cross_section_m2`);
* an absorbing load: a given absorption cross section, and/or a water volume
  (:func:`water_load_cross_section_m2`);
* the walls' own transmission (only a foil-thin wall makes it matter).

Each opening then radiates outside as a small aperture in a conducting plane
(:class:`ApertureLeakRadiator`): uniform gain 3 (4.8 dBi, the peak directivity of a
small aperture's equivalent dipole above its own conducting plane) over the outward
half-space, a quarter of that behind the face plane (edge diffraction around the box,
-6 dB as at a knife edge's shadow boundary), never more than twice the cavity density
times the opening's transmission right at its mouth.

Validity
--------
* Electrically large and well stirred: many overlapping modes.  keepclear warns when
  the Weyl mode count 8 pi V f^3 / (3 c^3) is below 60 (about V < 0.013 m^3 at
  2.45 GHz, a 24 cm cube); in a small or empty, high-Q box the field is a few standing
  modes, hot spots differ from the average by large factors and this model is only an
  order-of-magnitude guide.  A magnetron's spectrum (tens of MHz) and a mode stirrer
  help; a lossless load-free box is the worst case.
* Values are averages over stirring and frequency: the instantaneous leakage at a
  point fluctuates about them (exponential statistics of |E|^2 in a stirred cavity).
* Openings are treated independently; an opening close to another, to an edge or
  to the source gets no special treatment.  Seams, door gaps, hinges and cable
  entries are the usual leaks: give each one as a slot.
* The box is axis-aligned: ``size_m`` is the *inner* size along x, y, z, and the wall of
  ``thickness_m`` lies outside it.

References
----------
.. [1] D. A. Hill, M. T. Ma, A. R. Ondrejka, B. F. Riddle, M. L. Crawford and
   R. T. Johnk, "Aperture excitation of electrically large, lossy cavities",
   *IEEE Trans. Electromagn. Compat.* 36(3), 169-178 (1994), doi:10.1109/15.305461.
.. [2] D. A. Hill, "A reflection coefficient derivation for the Q of a reverberation
   chamber", *IEEE Trans. Electromagn. Compat.* 38(4), 591-592 (1996),
   doi:10.1109/15.544314.
.. [3] B. H. Liu, D. C. Chang and M. T. Ma, "Eigenmodes and the composite quality
   factor of a reverberating chamber", NBS Technical Note 1066 (1983).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any, Final, NamedTuple

import numpy as np
from numpy.typing import ArrayLike, NDArray

from keepclear.antennas.base import (
    C_M_S,
    ETA0_OHM,
    ModelInputError,
    Placement,
    Radiator,
    as_points,
)

from . import shielding as sh
from .errors import ScenarioError, entry_path

#: Face names: the outward normal's axis and sign.
FACES: Final[tuple[str, ...]] = ("+x", "-x", "+y", "-y", "+z", "-z")
#: Opening types.
OPENING_TYPES: Final[tuple[str, ...]] = (
    "hole",
    "slot",
    "vent-array",
    "mesh-window",
    "antenna-port",
)
#: Cell shapes of a vent array.
CELL_SHAPES: Final[tuple[str, ...]] = ("round", "square", "hexagonal")
#: Hole arrangements of a vent array or perforated window.
LATTICES: Final[tuple[str, ...]] = ("triangular", "square")
#: The axis names.
AXES: Final[tuple[str, ...]] = ("x", "y", "z")
#: Pairs of corner indices of :meth:`Enclosure.outline` that form the box's edges.
BOX_EDGES: Final[tuple[tuple[int, int], ...]] = (
    (0, 1), (2, 3), (4, 5), (6, 7),
    (0, 2), (1, 3), (4, 6), (5, 7),
    (0, 4), (1, 5), (2, 6), (3, 7),
)  # fmt: skip
#: Fewer Weyl modes than this below the operating frequency draws a warning.
MIN_MODE_COUNT: Final[int] = 60
#: Gain of a leaking opening over its outward half-space (small aperture over its plane).
FRONT_GAIN: Final[float] = 3.0
#: Gain behind the face plane (the front gain less 6 dB).
BACK_GAIN: Final[float] = FRONT_GAIN / 4
#: Wall-transmission radiators below this fraction of the input power are left out.
WALL_LEAK_FLOOR: Final[float] = 1e-12
#: Distance of the FDA 21 CFR 1030.10 leakage measurement from the outer surface [m].
FDA_DISTANCE_M: Final[float] = 0.05


def _face_axes(face: str) -> tuple[int, float, int, int]:
    """Normal axis index, sign, and the two in-plane axis indices (x, y, z order)."""
    axis = AXES.index(face[1])
    sign = 1.0 if face[0] == "+" else -1.0
    first, second = (a for a in range(3) if a != axis)
    return axis, sign, first, second


# ------------------------------------------------------------------ pure models
def hill_wall_cross_section_m2(
    frequency_hz: float, wall_area_m2: float, conductivity_s_m: float, relative_permeability: float
) -> float:
    """Mode-averaged absorption cross section of a cavity's metal walls.

    Parameters
    ----------
    frequency_hz : float
        Frequency [Hz].
    wall_area_m2 : float
        Inner wall area A [m^2].
    conductivity_s_m : float
        Wall conductivity [S m^-1].
    relative_permeability : float
        Wall relative permeability [1].

    Returns
    -------
    float
        :math:`\\sigma_w = 4\\pi\\mu_r\\delta A/(3\\lambda)` [m^2], such that the wall loss
        is :math:`\\sigma_w S_c`.

    Notes
    -----
    Equivalent to Hill's wall quality factor :math:`Q_1 = 3V/(2\\mu_r A\\delta)` through
    :math:`Q = 2\\pi V/(\\lambda\\sigma)`; it is also the plane-wave absorptivity of the
    wall averaged over a diffuse field (Hill 1996).  Liu, Chang and Ma's correction
    factor :math:`1 + (3\\lambda/32)(A/V)`... adds loss and is omitted (conservative).

    References
    ----------
    .. [1] Hill et al. 1994 (module references), eq. for Q1.
    .. [2] Hill 1996 (module references).
    """
    lam = C_M_S / frequency_hz
    delta = float(sh.skin_depth_m(frequency_hz, conductivity_s_m, relative_permeability))
    return 4 * math.pi * relative_permeability * delta * wall_area_m2 / (3 * lam)


def matched_antenna_cross_section_m2(frequency_hz: float) -> float:
    """Average transmission cross section of a matched, resonant aperture [m^2].

    Parameters
    ----------
    frequency_hz : float
        Frequency [Hz].

    Returns
    -------
    float
        :math:`\\lambda^2/4\\pi` in Hill's convention for :math:`\\langle\\sigma_l\\rangle`
        (half-space incidence, both polarisations).

    Notes
    -----
    A matched antenna in a diffuse field receives :math:`\\lambda^2 S_c / 8\\pi`
    (Hill 1994); an aperture passes :math:`\\langle\\sigma_l\\rangle S_c / 2`, so a
    resonant aperture that is matched to the outside (a resonant thin slot, whose two
    half-spaces load it equally) has :math:`\\langle\\sigma_l\\rangle = \\lambda^2/4\\pi`.
    """
    lam = C_M_S / frequency_hz
    return lam * lam / (4 * math.pi)


def aperture_transmission_cross_section_m2(
    frequency_hz: float, polarizabilities: sh.Polarizabilities, longest_m: float
) -> float:
    """Hill's average transmission cross section of an aperture, made conservative.

    Parameters
    ----------
    frequency_hz : float
        Frequency [Hz].
    polarizabilities : Polarizabilities
        Area and small-aperture polarisabilities (Collin's convention).
    longest_m : float
        Longest dimension L of the aperture [m].

    Returns
    -------
    float
        :math:`\\langle\\sigma_l\\rangle` [m^2] (an aperture passes
        :math:`\\langle\\sigma_l\\rangle S_c/2`).

    Notes
    -----
    Hill et al. (1994) give the small-aperture limit
    :math:`\\sigma_s = (4k^4/9\\pi)(\\alpha_e^2 + \\alpha_{m1}^2 + \\alpha_{m2}^2)`
    (a circular hole of radius a: :math:`16k^4a^6/9\\pi`) and the large-aperture limit
    :math:`A/2`.  Between them a thin slot resonates near :math:`L = \\lambda/2` and
    passes far more than either limit, up to the matched-antenna value
    :math:`\\sigma_r = \\lambda^2/4\\pi` (:func:`matched_antenna_cross_section_m2`).
    keepclear uses, with :math:`L_r = 0.45\\lambda` (thin slots resonate just below
    :math:`\\lambda/2`):

    * :math:`L \\ge L_r`: :math:`\\max(A/2,\\ \\sigma_r L/L_r)` (one resonant cross
      section per resonant length: a long slot holds several resonant sections);
    * :math:`L < L_r`: :math:`\\max(\\min(\\sigma_s, \\max(A/2, \\sigma_r)),\\
      \\sigma_r (L/L_r)^6)`: the small-aperture value, but never below an envelope that
      rises as :math:`L^6` (the small-aperture law) to the resonant value at
      :math:`L_r`.

    The envelope is keepclear's conservative construction (no source), chosen so that
    no length between the Rayleigh and resonant regimes is under-estimated; for holes
    much smaller than a wavelength the small-aperture value governs.
    """
    lam = C_M_S / frequency_hz
    k = 2 * math.pi / lam
    p = polarizabilities
    small = (4 * k**4 / (9 * math.pi)) * (
        p.electric_m3**2 + p.magnetic_major_m3**2 + p.magnetic_minor_m3**2
    )
    large = p.area_m2 / 2
    resonant = matched_antenna_cross_section_m2(frequency_hz)
    length_r = 0.45 * lam
    if longest_m >= length_r:
        return max(large, resonant * longest_m / length_r)
    envelope = resonant * (longest_m / length_r) ** 6
    return max(min(small, max(large, resonant)), envelope)


def cavity_q_factor(frequency_hz: float, volume_m3: float, cross_section_m2: float) -> float:
    """Quality factor of a cavity from a loss cross section: Q = 2 pi V / (lambda sigma).

    Parameters
    ----------
    frequency_hz : float
        Frequency [Hz].
    volume_m3 : float
        Cavity volume [m^3].
    cross_section_m2 : float
        Loss cross section (P = sigma S_c) [m^2].

    Returns
    -------
    float
        Q [1] (inf for zero loss).

    References
    ----------
    .. [1] Hill et al. 1994 (module references), Q = omega W / P with W = S_c V / c.
    """
    if cross_section_m2 <= 0:
        return math.inf
    return 2 * math.pi * volume_m3 * frequency_hz / (C_M_S * cross_section_m2)


def weyl_mode_count(frequency_hz: float, volume_m3: float) -> float:
    """Smoothed number of cavity modes below a frequency: 8 pi V f^3 / (3 c^3).

    Parameters
    ----------
    frequency_hz : float
        Frequency [Hz].
    volume_m3 : float
        Volume [m^3].

    Returns
    -------
    float
        Mode count [1].

    References
    ----------
    .. [1] Liu, Chang and Ma 1983 (module references), Weyl's leading term.
    """
    return 8 * math.pi * volume_m3 * frequency_hz**3 / (3 * C_M_S**3)


def water_relative_permittivity(frequency_hz: ArrayLike) -> NDArray[np.complex128]:
    """Complex relative permittivity of pure water at 20 degC (single Debye relaxation).

    Parameters
    ----------
    frequency_hz : array_like
        Frequency [Hz].

    Returns
    -------
    ndarray, complex
        :math:`\\varepsilon_\\infty + (\\varepsilon_s - \\varepsilon_\\infty)/(1 + j\\omega\\tau)`
        with :math:`\\varepsilon_s = 80.2`, :math:`\\varepsilon_\\infty = 5.7`,
        :math:`\\tau = 9.36` ps; about 78.7 - j10.5 at 2.45 GHz.

    References
    ----------
    .. [1] U. Kaatze, "Complex permittivity of water as a function of frequency and
       temperature", *J. Chem. Eng. Data* 34(4), 371-374 (1989),
       doi:10.1021/je00058a001 (Debye parameters from memory).
    """
    w = 2 * np.pi * np.asarray(frequency_hz, dtype=float)
    return 5.7 + (80.2 - 5.7) / (1 + 1j * w * 9.36e-12)


def water_load_cross_section_m2(frequency_hz: float, volume_m3: float) -> float:
    """Absorption cross section of a water load in a diffuse field (simple estimate).

    Parameters
    ----------
    frequency_hz : float
        Frequency [Hz].
    volume_m3 : float
        Water volume [m^3] (the FDA test load is 275e-6 m^3).

    Returns
    -------
    float
        :math:`\\sigma_a = (S/4)\\langle 1-|\\Gamma|^2\\rangle f_{abs}` [m^2].

    Notes
    -----
    The water is taken as a sphere of the same volume (the smallest surface S of any
    shape, so the least absorption: conservative).  A convex absorber in a diffuse
    field intercepts :math:`S S_c/4`; of that, the fraction
    :math:`\\langle 1 - |\\Gamma|^2\\rangle` (Fresnel transmission into a flat water
    surface averaged over the hemisphere and both polarisations) enters, and of what
    enters, :math:`f_{abs} = 1 - \\exp(-(4r/3)/\\delta_p)` is absorbed on one pass
    along the sphere's mean chord 4r/3 (internal reflections, which add absorption,
    are ignored).  :math:`\\delta_p` is the power penetration depth.  An estimate to
    perhaps +-50 %; give ``load_absorption_cross_section_m2`` for a known load.
    """
    if volume_m3 <= 0:
        return 0.0
    eps = complex(water_relative_permittivity(frequency_hz))
    r = (3 * volume_m3 / (4 * math.pi)) ** (1 / 3)
    area = 4 * math.pi * r * r

    def absorptivity(u: NDArray[np.float64]) -> NDArray[np.float64]:
        s2 = 1 - u * u
        root = np.sqrt(eps - s2)
        g_te = (u - root) / (u + root)
        g_tm = (eps * u - root) / (eps * u + root)
        return 1 - 0.5 * (np.abs(g_te) ** 2 + np.abs(g_tm) ** 2)

    enter = sh.hemisphere_average(absorptivity)
    k0 = 2 * math.pi * frequency_hz / C_M_S
    alpha = k0 * abs(np.sqrt(eps).imag)  # field attenuation [Np/m]
    depth_p = 1 / (2 * alpha)
    f_abs = 1 - math.exp(-(4 * r / 3) / depth_p)
    return area / 4 * enter * f_abs


# ------------------------------------------------------------------- radiator
class ApertureLeakRadiator(Radiator):
    """Leakage from an enclosure opening, radiating as a small aperture in a plane.

    Parameters
    ----------
    frequency_hz : float
        Frequency [Hz].
    power_w : float
        Power leaving through the opening [W].
    placement : Placement
        Opening centre on the outer face; local +z is the outward face normal.
    aperture_size_m : float
        Largest dimension of the opening [m].
    peak_power_density_w_m2 : float
        Ceiling of the plane-wave-equivalent density near the mouth [W m^-2].
    label : str
        Name for reports.

    Notes
    -----
    Plane-wave-equivalent density

    .. math::

        S(r) = \\min\\left(\\frac{P G}{4\\pi r^2} N(kr),\\ S_{max}\\right),\\quad
        N = \\max(1,\\ 4x(1+x)),\\ x = (kr)^{-2},

    G = 3 in the outward half-space (the peak directivity of a small aperture's
    equivalent tangential magnetic or normal electric dipole above its conducting
    plane, taken in every direction since the cavity field's polarisation is
    random) and 3/4 behind the face plane.  N(kr) is the largest ratio of a Hertzian
    dipole's near-field |H|^2 (or |E|^2) to its far-field peak, so the reactive field
    within about lambda/(2 pi) of the opening is not under-stated.  The power is not
    conserved (the pattern integrates to 1.9 P): a screening envelope like the
    isotropic source with gain.  E is transverse, along the local y axis projected;
    H = r x E / eta0; the phase is e^{-jkr}.

    References
    ----------
    .. [1] C. A. Balanis, *Antenna Theory*, 4th ed., Wiley, 2016, secs. 4.2 and 5.2
       (Hertzian dipole fields; small loop / magnetic dipole) and ch. 12 (aperture in a
       ground plane).
    """

    kind = "aperture-leak"

    def __init__(
        self,
        frequency_hz: float,
        power_w: float,
        placement: Placement,
        aperture_size_m: float,
        peak_power_density_w_m2: float,
        label: str = "leak",
    ) -> None:
        super().__init__(frequency_hz, power_w, placement)
        if not (math.isfinite(aperture_size_m) and aperture_size_m >= 0):
            raise ModelInputError("aperture_size_m", f"must be >= 0, got {aperture_size_m!r}")
        if not (math.isfinite(peak_power_density_w_m2) and peak_power_density_w_m2 >= 0):
            raise ModelInputError(
                "peak_power_density_w_m2", f"must be >= 0, got {peak_power_density_w_m2!r}"
            )
        self.aperture_size_m = float(aperture_size_m)
        self.peak_power_density_w_m2 = float(peak_power_density_w_m2)
        self.label = label

    @property
    def largest_dimension_m(self) -> float:
        """Largest dimension of the opening [m]."""
        return self.aperture_size_m

    def max_gain(self, samples: int = 0) -> float:
        """The front-half-space gain (linear)."""
        return FRONT_GAIN

    @staticmethod
    def _gain(directions_local: NDArray[np.float64]) -> NDArray[np.float64]:
        return np.where(directions_local[:, 2] >= 0, FRONT_GAIN, BACK_GAIN)

    @staticmethod
    def _polarisation(unit_r: NDArray[np.float64]) -> NDArray[np.float64]:
        y = np.array([0.0, 1.0, 0.0])
        e = y - (unit_r @ y)[:, None] * unit_r
        norm = np.linalg.norm(e, axis=1)
        fallback = np.array([1.0, 0.0, 0.0]) - unit_r[:, [0]] * unit_r
        e = np.where(norm[:, None] > 1e-9, e, fallback)
        return e / np.linalg.norm(e, axis=1, keepdims=True)

    def _local_far_field(self, directions_local: NDArray[np.float64]) -> NDArray[np.complex128]:
        amp = np.sqrt(ETA0_OHM * self.power_w * self._gain(directions_local) / (4 * np.pi))
        return (amp[:, None] * self._polarisation(directions_local)).astype(complex)

    def power_density(self, points_m: ArrayLike) -> NDArray[np.float64]:
        """Plane-wave-equivalent power density at scenario points [W m^-2]."""
        local = self.placement.to_local(as_points(points_m))
        return self._density(np.linalg.norm(local, axis=1), local)

    def _density(self, r: NDArray[np.float64], local: NDArray[np.float64]) -> NDArray:
        r_safe = np.maximum(r, 1e-12)
        unit = np.where(r[:, None] > 0, local / r_safe[:, None], [[0.0, 0.0, 1.0]])
        gain = self._gain(unit)
        kr = self.wavenumber_rad_m * r_safe
        x = 1.0 / (kr * kr)
        near = np.maximum(1.0, 4 * x * (1 + x))
        s_far = self.power_w * gain / (4 * np.pi * r_safe**2) * near
        return np.where(
            r > 0, np.minimum(s_far, self.peak_power_density_w_m2), self.peak_power_density_w_m2
        )

    def _local_fields(
        self, points_local_m: NDArray[np.float64]
    ) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
        r = np.linalg.norm(points_local_m, axis=1)
        r_safe = np.maximum(r, 1e-12)
        unit = np.where(r[:, None] > 0, points_local_m / r_safe[:, None], [[0.0, 0.0, 1.0]])
        s = self._density(r, points_local_m)
        phase = np.exp(-1j * self.wavenumber_rad_m * r)
        e = (np.sqrt(ETA0_OHM * s) * phase)[:, None] * self._polarisation(unit)
        h = np.cross(unit, e) / ETA0_OHM
        return e, h


# -------------------------------------------------------------------- openings
class OpeningLeak(NamedTuple):
    """Power-balance terms of one opening at one frequency."""

    cross_section_m2: float  # sigma_i: leaked power = sigma_i S_c
    open_cross_section_m2: float  # <sigma_l> of the opening without its screen or depth
    transmission: float  # depth / screen power transmission applied
    area_m2: float  # footprint on the face


@dataclass(frozen=True)
class Opening:
    """An opening in one face of the enclosure.

    Parameters
    ----------
    face : str
        One of :data:`FACES` (the outward normal: "+x" is the face at the largest x).
    kind : str
        One of :data:`OPENING_TYPES`.
    offset_m : tuple of float
        Centre of the opening from the face centre, along the face's two in-plane axes
        in x, y, z order (a "+x" face: (y, z); "+y": (x, z); "+z": (x, y)) [m].
    label : str
        Name for reports.
    diameter_m : float, optional
        Hole or antenna-port diameter [m].
    length_m, width_m : float, optional
        Slot length and width [m]; for a mesh window, ``width_m`` and ``height_m`` are
        its sizes along the first and second in-plane axes.
    height_m : float, optional
        Mesh-window size along the second in-plane axis [m].
    along : str, optional
        Axis name ("x", "y" or "z", in the face) along which a slot runs.
    depth_m : float, optional
        Depth of a hole, slot or vent cell (default: the wall thickness) or, for a
        perforated mesh window, the plate thickness [m].
    count : int
        Number of identical openings (holes, slots: clustered at the offset; vent
        array: cells).
    cell : str, optional
        Vent-array cell shape (:data:`CELL_SHAPES`).
    cell_size_m : float, optional
        Vent cell diameter, side or across-flats width [m].
    pitch_m : float, optional
        Vent cell or mesh spacing [m].
    wire_diameter_m : float, optional
        Mesh window of woven, bonded wire [m].
    hole_diameter_m : float, optional
        Mesh window of perforated plate with round holes [m].
    lattice : str
        Hole arrangement of a vent array or perforated window.
    """

    face: str
    kind: str
    offset_m: tuple[float, float] = (0.0, 0.0)
    label: str = "opening"
    diameter_m: float | None = None
    length_m: float | None = None
    width_m: float | None = None
    height_m: float | None = None
    along: str | None = None
    depth_m: float | None = None
    count: int = 1
    cell: str | None = None
    cell_size_m: float | None = None
    pitch_m: float | None = None
    wire_diameter_m: float | None = None
    hole_diameter_m: float | None = None
    lattice: str = "triangular"

    def __post_init__(self) -> None:
        if self.face not in FACES:
            raise ModelInputError(
                "face", f"face must be one of {', '.join(FACES)}, got {self.face!r}"
            )
        if self.kind not in OPENING_TYPES:
            raise ModelInputError(
                "type", f"type must be one of {', '.join(OPENING_TYPES)}, got {self.kind!r}"
            )
        if self.count < 1:
            raise ModelInputError("count", f"count must be >= 1, got {self.count!r}")
        required = {
            "hole": ("diameter_m",),
            "antenna-port": ("diameter_m",),
            "slot": ("length_m", "width_m"),
            "vent-array": ("cell_size_m", "pitch_m", "depth_m"),
            "mesh-window": ("width_m", "height_m", "pitch_m"),
        }[self.kind]
        for key in required:
            value = getattr(self, key)
            if value is None or not (math.isfinite(value) and value > 0):
                raise ModelInputError(key, f"{key} must be > 0 for a {self.kind}, got {value!r}")
        if self.kind == "slot":
            _, _, first, second = _face_axes(self.face)
            along = self.along if self.along is not None else AXES[first]
            if along not in (AXES[first], AXES[second]):
                raise ModelInputError(
                    "along",
                    f"along must be an axis in the {self.face} face "
                    f"({AXES[first]!r} or {AXES[second]!r}), got {self.along!r}",
                )
            object.__setattr__(self, "along", along)
            if self.width_m > self.length_m:  # type: ignore[operator]
                raise ModelInputError(
                    "width_m",
                    f"width_m ({self.width_m:g} m) must not exceed length_m ({self.length_m:g} m)",
                )
        if self.kind == "vent-array":
            if self.cell not in CELL_SHAPES:
                raise ModelInputError(
                    "cell", f"cell must be one of {', '.join(CELL_SHAPES)}, got {self.cell!r}"
                )
            if self.pitch_m < self.cell_size_m:  # type: ignore[operator]
                raise ModelInputError(
                    "pitch_m",
                    f"pitch_m ({self.pitch_m:g} m) must be at least cell_size_m "
                    f"({self.cell_size_m:g} m)",
                )
        if self.kind == "mesh-window" and (self.wire_diameter_m is None) == (
            self.hole_diameter_m is None
        ):
            raise ModelInputError(
                "wire_diameter_m",
                "a mesh-window needs exactly one of wire_diameter_m (woven wire mesh) or "
                "hole_diameter_m (perforated plate)",
            )
        if self.lattice not in LATTICES:
            raise ModelInputError(
                "lattice", f"lattice must be triangular or square, got {self.lattice!r}"
            )

    # ------------------------------------------------------------ geometry
    def footprint_m(self) -> tuple[float, float]:
        """Extent along the face's first and second in-plane axes [m]."""
        if self.kind in ("hole", "antenna-port"):
            d = float(self.diameter_m)  # type: ignore[arg-type]
            return d, d
        if self.kind == "slot":
            _, _, first, _ = _face_axes(self.face)
            length, width = float(self.length_m), float(self.width_m)  # type: ignore[arg-type]
            return (length, width) if self.along == AXES[first] else (width, length)
        if self.kind == "vent-array":
            side = math.ceil(math.sqrt(self.count)) * float(self.pitch_m)  # type: ignore[arg-type]
            return side, side
        return float(self.width_m), float(self.height_m)  # type: ignore[arg-type]

    def largest_dimension_m(self) -> float:
        """Largest dimension of the opening (diagonal of its footprint) [m]."""
        if self.kind in ("hole", "antenna-port"):
            return float(self.diameter_m)  # type: ignore[arg-type]
        a, b = self.footprint_m()
        return math.hypot(a, b)

    def key_for_size(self) -> str:
        """The scenario key that sets the opening's size (for error messages)."""
        return {
            "hole": "diameter_m",
            "antenna-port": "diameter_m",
            "slot": "length_m",
            "vent-array": "count",
            "mesh-window": "width_m",
        }[self.kind]

    # ------------------------------------------------------------- physics
    def leak(self, frequency_hz: float, wall_thickness_m: float, warn: bool = False) -> OpeningLeak:
        """Power-balance cross section of the opening.

        Parameters
        ----------
        frequency_hz : float
            Frequency [Hz].
        wall_thickness_m : float
            Wall thickness, the default depth [m].
        warn : bool
            Warn (:class:`ModelRangeWarning`) when vent cells do not cut off.

        Returns
        -------
        OpeningLeak

        Notes
        -----
        * hole: count x <sigma_l>(circle)/2 x the TE11 cut-off attenuation of its depth;
        * slot: count x <sigma_l>(equivalent ellipse)/2 x the TE10 cut-off attenuation of
          a rectangular tube of width = slot length;
        * vent-array: the larger of the cells taken one by one (count x cell
          <sigma_l>/2 x cell cut-off attenuation) and the array taken as a whole (the
          patch's <sigma_l>/2 x the diffuse-field transmission of the perforated
          patch, :func:`~keepclear.fields.shielding.perforated_plate_power_transmission`);
        * mesh-window: the window's <sigma_l>/2 x the diffuse-field transmission of
          its mesh or perforated plate;
        * antenna-port: a conductor through a hole guides a TEM wave that has no
          cut-off and can re-radiate outside like an antenna: <sigma_l> =
          max(hole, matched antenna lambda^2 / 4 pi), no depth credit.

        Diffuse-field transmission is
        :func:`~keepclear.fields.shielding.hemisphere_average` of the polarisation-
        averaged power transmission.
        """
        f = float(frequency_hz)
        depth = float(self.depth_m) if self.depth_m is not None else float(wall_thickness_m)
        a, b = self.footprint_m()
        if self.kind in ("hole", "antenna-port"):
            d = float(self.diameter_m)  # type: ignore[arg-type]
            sigma = aperture_transmission_cross_section_m2(
                f, sh.circular_aperture_polarizabilities(d), d
            )
            if self.kind == "antenna-port":
                sigma = max(sigma, matched_antenna_cross_section_m2(f))
                tau = 1.0
            else:
                tau = _db_to_power(sh.circular_cutoff_attenuation_db(f, d, depth, warn=False))
            area = math.pi * d * d / 4
            return OpeningLeak(self.count * sigma / 2 * tau, sigma, tau, self.count * area)
        if self.kind == "slot":
            length, width = float(self.length_m), float(self.width_m)  # type: ignore[arg-type]
            pol = sh.rectangular_aperture_polarizabilities(length, width)
            sigma = aperture_transmission_cross_section_m2(f, pol, math.hypot(length, width))
            tau = _db_to_power(
                sh.rectangular_cutoff_attenuation_db(f, length, depth, width, warn=False)
            )
            area = length * width
            return OpeningLeak(self.count * sigma / 2 * tau, sigma, tau, self.count * area)
        patch_pol = sh.rectangular_aperture_polarizabilities(a, b)
        sigma_patch = aperture_transmission_cross_section_m2(f, patch_pol, math.hypot(a, b))
        if self.kind == "vent-array":
            size, pitch = float(self.cell_size_m), float(self.pitch_m)  # type: ignore[arg-type]
            cell = str(self.cell)
            d_eq = sh.hole_equivalent_diameter_m(size, cell)
            sigma_cell = aperture_transmission_cross_section_m2(
                f, sh.circular_aperture_polarizabilities(d_eq), d_eq
            )
            if cell == "square":
                cut = sh.rectangular_cutoff_attenuation_db(f, size, depth, warn=warn)
            elif cell == "hexagonal":
                cut = sh.honeycomb_cutoff_attenuation_db(f, size, depth, warn=warn)
            else:
                cut = sh.circular_cutoff_attenuation_db(f, size, depth, warn=warn)
            tau_cell = _db_to_power(cut)
            incoherent = self.count * sigma_cell / 2 * tau_cell
            if pitch < (C_M_S / f) / 2 and d_eq < (C_M_S / f) / 2:
                diffuse = sh.hemisphere_average(
                    lambda u: sh.perforated_plate_power_transmission(
                        f,
                        size,
                        pitch,
                        depth,
                        hole_shape=cell,
                        lattice=self.lattice,
                        cos_incidence=u,
                        polarization="average",
                        warn=False,
                    )
                )
            else:
                diffuse = 0.0
            coherent = sigma_patch / 2 * diffuse
            area = self.count * math.pi * d_eq * d_eq / 4
            return OpeningLeak(
                max(incoherent, coherent),
                max(sigma_cell * self.count, sigma_patch),
                max(tau_cell, diffuse),
                min(area, a * b),
            )
        # mesh-window
        pitch = float(self.pitch_m)  # type: ignore[arg-type]
        if self.wire_diameter_m is not None:
            wire = float(self.wire_diameter_m)
            diffuse = sh.hemisphere_average(
                lambda u: sh.wire_mesh_power_transmission(
                    f, pitch, wire, cos_incidence=u, polarization="average"
                )
            )
        else:
            hole = float(self.hole_diameter_m)  # type: ignore[arg-type]
            diffuse = sh.hemisphere_average(
                lambda u: sh.perforated_plate_power_transmission(
                    f,
                    hole,
                    pitch,
                    depth,
                    lattice=self.lattice,
                    cos_incidence=u,
                    polarization="average",
                    warn=False,
                )
            )
        return OpeningLeak(sigma_patch / 2 * diffuse, sigma_patch, diffuse, a * b)


def _db_to_power(db: ArrayLike) -> float:
    value = float(np.asarray(db, dtype=float))
    return 10 ** (-value / 10) if value < 3000 else 0.0


# ------------------------------------------------------------------- enclosure
@dataclass(frozen=True, eq=False)
class Enclosure:
    """An axis-aligned metal box around sources, leaking through its openings.

    Parameters
    ----------
    min_corner_m : array_like, shape (3,)
        Inner corner with the smallest x, y, z [m].
    size_m : array_like, shape (3,)
        Inner size along x, y, z [m].
    metal : Metal
        Wall metal.
    thickness_m : float
        Wall thickness, outside the inner size [m].
    openings : tuple of Opening
        Openings in the faces.
    load_absorption_cross_section_m2 : float
        Absorption cross section of a load in the cavity [m^2].
    load_water_volume_m3 : float
        Volume of a water load [m^3] (:func:`water_load_cross_section_m2`).
    label : str
        Name for reports.
    source_name : str, optional
        Scenario file, for error messages.

    Notes
    -----
    See the module docstring for the method and its validity.
    """

    min_corner_m: NDArray[np.float64]
    size_m: NDArray[np.float64]
    metal: sh.Metal
    thickness_m: float
    openings: tuple[Opening, ...] = ()
    load_absorption_cross_section_m2: float = 0.0
    load_water_volume_m3: float = 0.0
    label: str = "enclosure"
    source_name: str | None = None

    def __post_init__(self) -> None:
        corner = np.asarray(self.min_corner_m, dtype=float)
        size = np.asarray(self.size_m, dtype=float)
        if corner.shape != (3,) or not np.all(np.isfinite(corner)):
            raise ModelInputError(
                "min_corner_m", f"must be three finite numbers, got {self.min_corner_m!r}"
            )
        if size.shape != (3,) or not np.all(np.isfinite(size)) or np.any(size <= 0):
            raise ModelInputError(
                "size_m", f"size_m must be three sizes > 0 [m], got {self.size_m!r}"
            )
        if not (math.isfinite(self.thickness_m) and self.thickness_m > 0):
            raise ModelInputError(
                "thickness_m", f"thickness_m must be > 0, got {self.thickness_m!r}"
            )
        for key in ("load_absorption_cross_section_m2", "load_water_volume_m3"):
            value = getattr(self, key)
            if not (math.isfinite(value) and value >= 0):
                raise ModelInputError(key, f"{key} must be >= 0, got {value!r}")
        if self.load_water_volume_m3 > float(np.prod(size)):
            raise ModelInputError(
                "load_water_volume_m3",
                f"load_water_volume_m3 ({self.load_water_volume_m3:g} m^3) exceeds the cavity "
                f"volume ({float(np.prod(size)):g} m^3)",
            )
        object.__setattr__(self, "min_corner_m", corner)
        object.__setattr__(self, "size_m", size)
        object.__setattr__(self, "openings", tuple(self.openings))
        for i, opening in enumerate(self.openings):
            self._check_fits(i, opening)

    def _check_fits(self, index: int, opening: Opening) -> None:
        _, _, first, second = _face_axes(opening.face)
        face = (float(self.size_m[first]), float(self.size_m[second]))
        extent = opening.footprint_m()
        offset = opening.offset_m
        for j in range(2):
            axis = AXES[(first, second)[j]]
            if extent[j] > face[j] + 1e-12:
                raise ModelInputError(
                    f"{entry_path('opening', index)}.{opening.key_for_size()}",
                    f"the {opening.kind} is {extent[j]:g} m across along {axis}, larger than "
                    f"the {opening.face} face ({face[j]:g} m along {axis})",
                )
            if abs(offset[j]) + extent[j] / 2 > face[j] / 2 + 1e-12:
                raise ModelInputError(
                    f"{entry_path('opening', index)}.offset_m",
                    f"the {opening.kind} runs off the {opening.face} face: offset {offset[j]:g} m "
                    f"along {axis} with half-size {extent[j] / 2:g} m, but the face reaches "
                    f"only +-{face[j] / 2:g} m from its centre",
                )

    # -------------------------------------------------------------- geometry
    @property
    def center_m(self) -> NDArray[np.float64]:
        """Centre of the cavity [m]."""
        return self.min_corner_m + self.size_m / 2

    @property
    def max_corner_m(self) -> NDArray[np.float64]:
        """Inner corner with the largest x, y, z [m]."""
        return self.min_corner_m + self.size_m

    @property
    def volume_m3(self) -> float:
        """Cavity volume [m^3]."""
        return float(np.prod(self.size_m))

    @property
    def wall_area_m2(self) -> float:
        """Inner wall area, openings excluded [m^2]."""
        a, b, c = self.size_m
        gross = 2 * (a * b + b * c + c * a)
        holes = sum(o.footprint_m()[0] * o.footprint_m()[1] for o in self.openings)
        return float(max(gross - holes, 0.0))

    def face_area_m2(self, face: str) -> float:
        """Inner area of one face, its openings excluded [m^2]."""
        _, _, first, second = _face_axes(face)
        gross = float(self.size_m[first] * self.size_m[second])
        holes = sum(
            o.footprint_m()[0] * o.footprint_m()[1] for o in self.openings if o.face == face
        )
        return max(gross - holes, 0.0)

    def contains(self, points_m: ArrayLike) -> NDArray[np.bool_]:
        """Whether points lie strictly inside the cavity (N,)."""
        p = as_points(points_m)
        return np.all((p > self.min_corner_m) & (p < self.max_corner_m), axis=1)

    def in_wall(self, points_m: ArrayLike) -> NDArray[np.bool_]:
        """Whether points lie in the wall: inside the outer box, not strictly inside (N,)."""
        p = as_points(points_m)
        t = self.thickness_m
        outer = np.all((p >= self.min_corner_m - t) & (p <= self.max_corner_m + t), axis=1)
        return outer & ~self.contains(p)

    def outline(self) -> NDArray[np.float64]:
        """The eight outer corners (8, 3) of the box, for drawing [m].

        The same form as every drawable object (radiators, reflectors, shields): points
        whose convex hull is the object.  Corner i has its x, y, z at the maximum where
        bit 0, 1, 2 of i is set; :data:`BOX_EDGES` lists the twelve edges as index pairs.
        """
        lo = self.min_corner_m - self.thickness_m
        hi = self.max_corner_m + self.thickness_m
        return np.array(
            [[(hi if (i >> a) & 1 else lo)[a] for a in range(3)] for i in range(8)], dtype=float
        )

    def opening_position_m(self, opening: Opening) -> NDArray[np.float64]:
        """Centre of an opening on the outer surface of its face [m]."""
        axis, sign, first, second = _face_axes(opening.face)
        p = self.center_m.copy()
        p[axis] += sign * (self.size_m[axis] / 2 + self.thickness_m)
        p[first] += opening.offset_m[0]
        p[second] += opening.offset_m[1]
        return p

    def opening_outline(self, opening: Opening) -> NDArray[np.float64]:
        """Corners (4, 3) of an opening's footprint on the outer face [m]."""
        _, _, first, second = _face_axes(opening.face)
        c = self.opening_position_m(opening)
        a, b = opening.footprint_m()
        out = np.repeat(c[None, :], 4, axis=0)
        for k, (sa, sb) in enumerate(((-1, -1), (1, -1), (1, 1), (-1, 1))):
            out[k, first] += sa * a / 2
            out[k, second] += sb * b / 2
        return out

    def check_sources(self, positions_m: ArrayLike, labels: Sequence[str]) -> None:
        """Refuse sources that sit in the wall, or an enclosure that holds no source.

        Parameters
        ----------
        positions_m : array_like, shape (S, 3)
            Source reference points [m], in scenario order.
        labels : sequence of str
            Source ids, in the same order.

        Raises
        ------
        ScenarioError
            Located at ``source[i].position_m`` for a source inside the wall, or at the
            enclosure when no source lies inside the cavity.

        Notes
        -----
        A source outside the box is allowed when at least one source is inside: it
        radiates directly (the field orchestrator treats it as a free source), which
        is the conservative reading of a source placed beside an enclosure.
        """
        p = np.asarray(positions_m, dtype=float).reshape(-1, 3)
        lo, hi = self.min_corner_m, self.max_corner_m
        bounds = ", ".join(f"{AXES[a]} in ({lo[a]:g}, {hi[a]:g})" for a in range(3))
        walls = self.in_wall(p) if p.shape[0] else np.zeros(0, dtype=bool)
        for i in np.flatnonzero(walls):
            raise ScenarioError(
                f"source '{labels[i]}' at position_m {p[i].tolist()} lies inside the "
                f"{self.thickness_m:g} m wall of the enclosure; a source must be inside the "
                f"cavity ({bounds} m) or clear of the box",
                self.source_name,
                f"{entry_path('source', i)}.position_m",
            )
        if p.shape[0] == 0 or not np.any(self.contains(p)):
            raise ScenarioError(
                f"no source lies inside the enclosure cavity ({bounds} m): put the "
                "enclosed source's position_m inside it (or remove [enclosure])",
                self.source_name,
                "enclosure",
            )

    # ---------------------------------------------------------------- physics
    def mode_count(self, frequency_hz: float) -> float:
        """Weyl mode count below the frequency [1]."""
        return weyl_mode_count(frequency_hz, self.volume_m3)

    def validity_warning(self, frequency_hz: float) -> str | None:
        """A sentence when the box is too small for the stirred-cavity model, else None."""
        n = self.mode_count(frequency_hz)
        if n >= MIN_MODE_COUNT:
            return None
        need = 3 * MIN_MODE_COUNT * C_M_S**3 / (8 * math.pi * frequency_hz**3)
        return (
            f"the enclosure has about {n:.0f} cavity modes below {frequency_hz:.4g} Hz "
            f"(fewer than {MIN_MODE_COUNT}); the power-balance leakage model needs an "
            f"electrically large, well-stirred box (volume above about {need:.3g} m^3) and "
            "is only an order-of-magnitude guide here"
        )

    def _wall_transmission(self, frequency_hz: float) -> float:
        m = self.metal
        return sh.hemisphere_average(
            lambda u: sh.sheet_power_transmission(
                frequency_hz,
                m.conductivity_s_m,
                self.thickness_m,
                m.relative_permeability,
                u,
                "average",
            )
        )

    def power_balance(self, total_power_w: float, frequency_hz: float) -> dict[str, Any]:
        """Steady-state power balance of the cavity.

        Parameters
        ----------
        total_power_w : float
            Power delivered into the cavity by all sources while radiating [W].
        frequency_hz : float
            Frequency [Hz].

        Returns
        -------
        dict
            ``cavity_power_density_w_m2`` (S_c), ``cavity_e_v_m`` (sqrt(eta0 S_c)),
            ``q_factor`` and its parts ``q_walls``, ``q_load``, ``q_openings``,
            ``cross_sections_m2`` and ``losses_w`` (``walls``, ``load``,
            ``wall_transmission``, ``openings``), ``openings`` (per opening: ``id``,
            ``face``, ``type``, ``cross_section_m2``, ``transmission``,
            ``leaked_power_w``), ``leaked_power_w`` (openings plus wall transmission),
            ``mode_count``, ``input_power_w``, ``frequency_hz``.  The losses sum to the
            input power.
        """
        p_in = float(total_power_w)
        if not (math.isfinite(p_in) and p_in >= 0):
            raise ModelInputError("power_w", f"total power must be >= 0, got {total_power_w!r}")
        f = float(frequency_hz)
        m = self.metal
        s_walls = hill_wall_cross_section_m2(
            f, self.wall_area_m2, m.conductivity_s_m, m.relative_permeability
        )
        s_load = self.load_absorption_cross_section_m2 + water_load_cross_section_m2(
            f, self.load_water_volume_m3
        )
        s_wt = self.wall_area_m2 / 4 * self._wall_transmission(f)
        leaks = [o.leak(f, self.thickness_m) for o in self.openings]
        s_open = sum(leak.cross_section_m2 for leak in leaks)
        total = s_walls + s_load + s_wt + s_open
        s_c = p_in / total
        v = self.volume_m3
        openings = [
            {
                "id": o.label,
                "face": o.face,
                "type": o.kind,
                "cross_section_m2": leak.cross_section_m2,
                "open_cross_section_m2": leak.open_cross_section_m2,
                "transmission": leak.transmission,
                "leaked_power_w": leak.cross_section_m2 * s_c,
            }
            for o, leak in zip(self.openings, leaks, strict=True)
        ]
        return {
            "frequency_hz": f,
            "input_power_w": p_in,
            "cavity_power_density_w_m2": s_c,
            "cavity_e_v_m": math.sqrt(ETA0_OHM * s_c),
            "q_factor": cavity_q_factor(f, v, total),
            "q_walls": cavity_q_factor(f, v, s_walls),
            "q_load": cavity_q_factor(f, v, s_load),
            "q_openings": cavity_q_factor(f, v, s_open),
            "mode_count": self.mode_count(f),
            "cross_sections_m2": {
                "walls": s_walls,
                "load": s_load,
                "wall_transmission": s_wt,
                "openings": s_open,
                "total": total,
            },
            "losses_w": {
                "walls": s_walls * s_c,
                "load": s_load * s_c,
                "wall_transmission": s_wt * s_c,
                "openings": s_open * s_c,
            },
            "openings": openings,
            "leaked_power_w": (s_open + s_wt) * s_c,
        }

    def leakage_radiators(
        self, source_powers_w: Sequence[float], frequency_hz: float
    ) -> list[tuple[Radiator, NDArray[np.float64]]]:
        """The radiators that carry the leakage outside.

        Parameters
        ----------
        source_powers_w : sequence of float
            Power of each enclosed source while radiating [W].
        frequency_hz : float
            Frequency [Hz].

        Returns
        -------
        list of (Radiator, ndarray)
            One :class:`ApertureLeakRadiator` per opening (and per face whose wall
            transmission leaks more than 1e-12 of the input), radiating the leakage for
            the *total* input power, with each source's share of it (the fractions
            P_s / sum P, the same for every opening: the stirred cavity mixes the
            sources), so that duty cycles can be applied per source.
        """
        powers = np.asarray(source_powers_w, dtype=float).reshape(-1)
        if np.any(~np.isfinite(powers) | (powers < 0)):
            raise ModelInputError("power_w", f"source powers must be >= 0, got {source_powers_w!r}")
        total = float(np.sum(powers))
        shares = powers / total if total > 0 else np.zeros_like(powers)
        balance = self.power_balance(total, frequency_hz)
        s_c = balance["cavity_power_density_w_m2"]
        out: list[tuple[Radiator, NDArray[np.float64]]] = []
        for opening, info in zip(self.openings, balance["openings"], strict=True):
            axis, sign, first, second = _face_axes(opening.face)
            normal = np.zeros(3)
            normal[axis] = sign
            pol = np.zeros(3)
            pol[second if (opening.kind == "slot" and opening.along == AXES[first]) else first] = 1
            placement = Placement.from_axes(self.opening_position_m(opening), normal, pol)
            radiator = ApertureLeakRadiator(
                frequency_hz,
                info["leaked_power_w"],
                placement,
                opening.largest_dimension_m(),
                2 * s_c * min(1.0, info["transmission"]),
                f"{self.label}:{opening.label}",
            )
            out.append((radiator, shares.copy()))
        t_wall = self._wall_transmission(frequency_hz)
        for face in FACES:
            p_face = self.face_area_m2(face) / 4 * t_wall * s_c
            if total <= 0 or p_face <= WALL_LEAK_FLOOR * total:
                continue
            axis, sign, first, second = _face_axes(face)
            normal = np.zeros(3)
            normal[axis] = sign
            position = self.center_m.copy()
            position[axis] += sign * (self.size_m[axis] / 2 + self.thickness_m)
            size = math.hypot(self.size_m[first], self.size_m[second])
            radiator = ApertureLeakRadiator(
                frequency_hz,
                p_face,
                Placement.from_axes(position, normal),
                size,
                2 * s_c * t_wall,
                f"{self.label}:wall{face}",
            )
            out.append((radiator, shares.copy()))
        return out

    def face_density_5cm(self, total_power_w: float, frequency_hz: float) -> list[dict[str, Any]]:
        """The highest leakage power density 5 cm outside each face.

        Parameters
        ----------
        total_power_w : float
            Total power delivered into the cavity [W] (the FDA test runs the oven at
            full power, continuously).
        frequency_hz : float
            Frequency [Hz].

        Returns
        -------
        list of dict
            Per face, in :data:`FACES` order: ``face``, ``power_density_w_m2`` (the
            largest plane-wave-equivalent density found), ``position_m`` (where),
            ``distance_m`` (0.05).

        Notes
        -----
        Points on the plane 5 cm outside each outer face, over the face (a 31 x 31 grid)
        and in front of every opening; the openings' densities add as powers (the
        stirred cavity drives them incoherently).  For the FDA 21 CFR 1030.10 checks
        (1 mW/cm^2 = 10 W/m^2 new, 5 mW/cm^2 = 50 W/m^2 in service) at 5 cm from any
        external surface.
        """
        radiators = [r for r, _ in self.leakage_radiators([float(total_power_w)], frequency_hz)]
        lo = self.min_corner_m - self.thickness_m
        hi = self.max_corner_m + self.thickness_m
        grid = np.linspace(0.0, 1.0, 31)
        results = []
        for face in FACES:
            axis, sign, first, second = _face_axes(face)
            ga, gb = np.meshgrid(
                lo[first] + grid * (hi[first] - lo[first]),
                lo[second] + grid * (hi[second] - lo[second]),
            )
            pts = np.zeros((ga.size, 3))
            pts[:, first] = ga.ravel()
            pts[:, second] = gb.ravel()
            plane = (hi if sign > 0 else lo)[axis] + sign * FDA_DISTANCE_M
            pts[:, axis] = plane
            extra = [self.opening_position_m(o) for o in self.openings if o.face == face]
            if extra:
                e = np.array(extra)
                e[:, axis] = plane
                pts = np.vstack([pts, e])
            density = np.zeros(pts.shape[0])
            for radiator in radiators:
                density += radiator.power_density(pts)  # type: ignore[attr-defined]
            k = int(np.argmax(density))
            results.append(
                {
                    "face": face,
                    "power_density_w_m2": float(density[k]),
                    "position_m": pts[k].tolist(),
                    "distance_m": FDA_DISTANCE_M,
                }
            )
        return results


__all__ = [
    "AXES",
    "BOX_EDGES",
    "CELL_SHAPES",
    "FACES",
    "FDA_DISTANCE_M",
    "OPENING_TYPES",
    "ApertureLeakRadiator",
    "Enclosure",
    "Opening",
    "OpeningLeak",
    "aperture_transmission_cross_section_m2",
    "cavity_q_factor",
    "hill_wall_cross_section_m2",
    "matched_antenna_cross_section_m2",
    "water_load_cross_section_m2",
    "water_relative_permittivity",
    "weyl_mode_count",
]
