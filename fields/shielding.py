"""Shielding effectiveness of metal sheets, apertures, meshes and cut-off vents.

Pure, vectorised model functions, one published model each, kept in one module so
that the scikit-rf details (units, ``rho=``, cut-off behaviour) live in one place:

* wall metals (:data:`METALS`, :func:`metal_from_name`) and :func:`skin_depth_m`;
* Schelkunoff's three-term shielding effectiveness of a conducting sheet
  (:func:`schelkunoff_sheet_se`), also at oblique incidence
  (:func:`sheet_power_transmission`), and the same sheet computed exactly as a
  transmission-line slab with scikit-rf (:func:`slab_network_skrf`,
  :func:`slab_se_db_skrf`);
* single and multiple apertures (:func:`aperture_se_db`,
  :func:`multiple_aperture_correction_db`), small-aperture polarisabilities
  (:func:`circular_aperture_polarizabilities`,
  :func:`elliptical_aperture_polarizabilities`,
  :func:`rectangular_aperture_polarizabilities`);
* perforated plates (:func:`perforated_plate_power_transmission`) and woven wire
  meshes (:func:`wire_mesh_power_transmission`);
* waveguide-below-cut-off tubes from scikit-rf's propagation constants
  (:func:`circular_cutoff_attenuation_db`, :func:`rectangular_cutoff_attenuation_db`,
  :func:`honeycomb_cutoff_attenuation_db`) and a cut-off vent panel
  (:func:`cutoff_vent_se_db`);
* the near-field reduction of aperture shielding (:func:`near_field_aperture_se_db`),
  knife-edge diffraction (:func:`knife_edge_field_ratio`) and the random-incidence
  average used by the cavity model (:func:`hemisphere_average`).

Conventions: shielding effectiveness (SE) is in dB and positive; a *power
transmission* is the ratio of transmitted to incident power density (a number in
[0, 1]); a field amplitude factor is its square root.  Frequencies in Hz, lengths in m.

Every estimate here errs towards *less* shielding where the model is uncertain; the
choices are stated in each docstring.  A shielding estimate is not a leakage survey:
seams, doors and cable entries leak most and are not in these formulas.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable
from dataclasses import dataclass
from typing import Final, NamedTuple

import numpy as np
import skrf
from numpy.typing import ArrayLike, NDArray
from scipy import constants, special
from skrf.media import CircularWaveguide, DefinedGammaZ0, Freespace, RectangularWaveguide

from keepclear.antennas.base import C_M_S, ETA0_OHM, ModelInputError, ModelRangeWarning

from .errors import suggest

#: 20 / ln(10): decibels per neper of field amplitude.
DB_PER_NEPER: Final[float] = 20.0 / math.log(10.0)

#: First zero of J1' (circular TE11 cut-off), from scipy.
_P11: Final[float] = float(special.jnp_zeros(1, 1)[0])


# --------------------------------------------------------------------------- metals
@dataclass(frozen=True)
class Metal:
    """Bulk electrical properties of a wall or sheet metal at microwave frequencies.

    Parameters
    ----------
    name : str
        Scenario name.
    conductivity_s_m : float
        DC/RF conductivity used [S m^-1].
    relative_permeability : float
        Relative permeability used at the operating frequency [1].
    note : str
        Where the value comes from and why it was chosen.
    """

    name: str
    conductivity_s_m: float
    relative_permeability: float
    note: str


#: Wall and sheet metals known to scenario files.  Conductivities are handbook
#: room-temperature values; where a range exists the *lower* value is used, since lower
#: conductivity gives less shielding and more wall loss is not credited (see notes).
METALS: Final[dict[str, Metal]] = {
    "copper": Metal(
        "copper",
        5.80e7,
        1.0,
        "annealed copper, 100 % IACS = 1/(1.7241 uOhm cm) (IEC 60028 standard annealed "
        "copper, from memory)",
    ),
    "aluminium": Metal(
        "aluminium",
        3.5e7,
        1.0,
        "commercial-purity aluminium; Ott (2009) Table 6-1 relative conductivity 0.61 "
        "(from memory). Pure Al is 3.77e7 S/m (2.65 uOhm cm); the lower value is used",
    ),
    "aluminium-6061": Metal(
        "aluminium-6061",
        2.5e7,
        1.0,
        "6061-T6 alloy, about 43 % IACS (from memory); use for alloy sheet and extrusions",
    ),
    "brass": Metal(
        "brass",
        1.5e7,
        1.0,
        "yellow/cartridge brass, Ott (2009) Table 6-1 relative conductivity 0.26 (from memory)",
    ),
    "mild-steel": Metal(
        "mild-steel",
        5.8e6,
        1.0,
        "low-carbon steel, Ott (2009) Table 6-1 'steel (SAE 1045)' relative conductivity "
        "0.10 (from memory). mu_r = 1 at microwave frequencies: the DC permeability "
        "(hundreds to ~1000) has relaxed past the ferromagnetic resonance, and mu_r = 1 "
        "gives the least absorption, so it is the conservative choice",
    ),
    "galvanised-steel": Metal(
        "galvanised-steel",
        5.8e6,
        1.0,
        "steel substrate values (as mild-steel); the zinc coating (about 1.7e7 S/m) is "
        "ignored, which under-states the reflection loss (conservative)",
    ),
    "stainless-steel-304": Metal(
        "stainless-steel-304",
        1.4e6,
        1.0,
        "austenitic AISI 304, resistivity 72 uOhm cm (from memory), non-magnetic "
        "(mu_r = 1; cold work can make it slightly magnetic)",
    ),
}

#: Accepted spellings that map to a name in :data:`METALS`.
METAL_ALIASES: Final[dict[str, str]] = {
    "aluminum": "aluminium",
    "aluminum-6061": "aluminium-6061",
    "galvanized-steel": "galvanised-steel",
}

#: The canonical metal names, in table order.
METAL_NAMES: Final[tuple[str, ...]] = tuple(METALS)

#: Every name a scenario file may use for ``metal``.
METAL_CHOICES: Final[tuple[str, ...]] = METAL_NAMES + tuple(METAL_ALIASES)

#: The least conductive metal of the table: the default where a cap needs a metal.
WORST_METAL: Final[str] = min(METALS, key=lambda k: METALS[k].conductivity_s_m)


def metal_from_name(name: str, parameter: str = "metal") -> Metal:
    """Look up a wall metal by name (aliases accepted).

    Parameters
    ----------
    name : str
        One of :data:`METAL_CHOICES`.
    parameter : str
        Scenario key used in the error message.

    Returns
    -------
    Metal

    Raises
    ------
    ModelInputError
        For an unknown name, listing the known ones and the closest match.
    """
    key = METAL_ALIASES.get(name, name)
    if key not in METALS:
        raise ModelInputError(
            parameter,
            f"unknown metal {name!r}; known metals: {', '.join(METAL_NAMES)}"
            + suggest(str(name), METAL_CHOICES),
        )
    return METALS[key]


def _positive(value: ArrayLike, parameter: str, allow_zero: bool = False) -> NDArray[np.float64]:
    arr = np.asarray(value, dtype=float)
    bad = ~np.isfinite(arr) | ((arr < 0) if allow_zero else (arr <= 0))
    if np.any(bad):
        what = ">= 0" if allow_zero else "> 0"
        raise ModelInputError(parameter, f"{parameter} must be finite and {what}, got {value!r}")
    return arr


def skin_depth_m(
    frequency_hz: ArrayLike, conductivity_s_m: ArrayLike, relative_permeability: ArrayLike = 1.0
) -> NDArray[np.float64]:
    """Skin depth of a good conductor.

    Parameters
    ----------
    frequency_hz : array_like
        Frequency [Hz].
    conductivity_s_m : array_like
        Conductivity [S m^-1].
    relative_permeability : array_like
        Relative permeability of the metal [1].

    Returns
    -------
    ndarray
        Skin depth [m].

    Notes
    -----
    :math:`\\delta = \\sqrt{2/(\\omega\\mu\\sigma)} = 1/\\sqrt{\\pi f \\mu_0 \\mu_r \\sigma}`,
    valid for :math:`\\sigma \\gg \\omega\\varepsilon_0` (every metal at microwave
    frequencies).  At 2.45 GHz: copper 1.33 um, aluminium (3.5e7 S/m) 1.72 um,
    stainless steel 304 8.6 um.

    References
    ----------
    .. [1] D. M. Pozar, *Microwave Engineering*, 4th ed., Wiley, 2012, sec. 1.7,
       (skin depth of a good conductor).
    """
    f = _positive(frequency_hz, "frequency_hz")
    s = _positive(conductivity_s_m, "conductivity_s_m")
    m = _positive(relative_permeability, "relative_permeability")
    return 1.0 / np.sqrt(np.pi * f * constants.mu_0 * m * s)


def surface_impedance_ohm(
    frequency_hz: ArrayLike, conductivity_s_m: ArrayLike, relative_permeability: ArrayLike = 1.0
) -> NDArray[np.complex128]:
    """Intrinsic impedance of a conducting medium, displacement current included.

    Parameters
    ----------
    frequency_hz : array_like
        Frequency [Hz].
    conductivity_s_m : array_like
        Conductivity [S m^-1].
    relative_permeability : array_like
        Relative permeability [1].

    Returns
    -------
    ndarray, complex
        :math:`\\eta_s = \\sqrt{j\\omega\\mu/(\\sigma + j\\omega\\varepsilon_0)}` [ohm]
        (about :math:`(1+j)/(\\sigma\\delta)` for a metal).
    """
    w = 2 * np.pi * np.asarray(frequency_hz, dtype=float)
    mu = constants.mu_0 * np.asarray(relative_permeability, dtype=float)
    sigma_c = np.asarray(conductivity_s_m, dtype=float) + 1j * w * constants.epsilon_0
    return np.sqrt(1j * w * mu / sigma_c)


def _propagation_constant(
    frequency_hz: ArrayLike, conductivity_s_m: ArrayLike, relative_permeability: ArrayLike
) -> NDArray[np.complex128]:
    w = 2 * np.pi * np.asarray(frequency_hz, dtype=float)
    mu = constants.mu_0 * np.asarray(relative_permeability, dtype=float)
    sigma_c = np.asarray(conductivity_s_m, dtype=float) + 1j * w * constants.epsilon_0
    return np.sqrt(1j * w * mu * sigma_c)


# ------------------------------------------------------------- Schelkunoff sheet
class SheetShielding(NamedTuple):
    """The three Schelkunoff terms of a sheet's shielding effectiveness [dB]."""

    absorption_db: NDArray[np.float64]
    reflection_db: NDArray[np.float64]
    multiple_reflection_db: NDArray[np.float64]
    total_db: NDArray[np.float64]


def schelkunoff_sheet_se(
    frequency_hz: ArrayLike,
    conductivity_s_m: ArrayLike,
    thickness_m: ArrayLike,
    relative_permeability: ArrayLike = 1.0,
    wave_impedance_ohm: ArrayLike = ETA0_OHM,
) -> SheetShielding:
    """Schelkunoff's shielding effectiveness of an infinite conducting sheet.

    Parameters
    ----------
    frequency_hz : array_like
        Frequency [Hz].
    conductivity_s_m : array_like
        Sheet conductivity [S m^-1].
    thickness_m : array_like
        Sheet thickness [m].
    relative_permeability : array_like
        Relative permeability of the sheet [1].
    wave_impedance_ohm : array_like
        Wave impedance of the incident wave on both sides [ohm]: eta0 for a plane
        wave at normal incidence, eta0 cos(theta) (TM) or eta0 / cos(theta) (TE) at
        oblique incidence, a near-field wave impedance otherwise.

    Returns
    -------
    SheetShielding
        Absorption A, reflection R, multiple-reflection correction B and the total
        SE = A + R + B [dB].

    Notes
    -----
    With :math:`\\gamma` and :math:`\\eta_s` the propagation constant and intrinsic
    impedance of the metal and :math:`Z_w` the wave impedance outside,

    .. math::

        A = 8.686\\,\\Re(\\gamma)\\,t \\;(= 8.686\\,t/\\delta), \\quad
        R = 20\\log_{10}\\left|\\frac{(Z_w+\\eta_s)^2}{4 Z_w \\eta_s}\\right|, \\quad
        B = 20\\log_{10}\\left|1 - \\left(\\frac{Z_w-\\eta_s}{Z_w+\\eta_s}\\right)^2
            e^{-2\\gamma t}\\right|.

    Written with complex :math:`\\gamma` and :math:`\\eta_s` the sum is the exact
    transmission of a homogeneous slab (it agrees with :func:`slab_se_db_skrf` to
    rounding); the familiar forms follow for a good conductor (A = 8.686 t/delta,
    R = 20 log10(eta0 / (4 |eta_s|))).  B is negative (less shielding) for sheets
    thinner than a few skin depths and vanishes for thick ones.  The sheet is infinite:
    edges, seams and holes are not included.

    References
    ----------
    .. [1] S. A. Schelkunoff, *Electromagnetic Waves*, Van Nostrand, 1943, ch. 8.
    .. [2] H. W. Ott, *Electromagnetic Compatibility Engineering*, Wiley, 2009,
       ch. 6, secs. 6.4-6.6 (absorption, reflection and multiple-reflection terms).
    .. [3] C. R. Paul, *Introduction to Electromagnetic Compatibility*, 2nd ed.,
       Wiley, 2006, ch. 10, sec. 10.1 (shielding effectiveness of a sheet).
    """
    t = _positive(thickness_m, "thickness_m", allow_zero=True)
    _positive(conductivity_s_m, "conductivity_s_m")
    gamma = _propagation_constant(frequency_hz, conductivity_s_m, relative_permeability)
    eta_s = surface_impedance_ohm(frequency_hz, conductivity_s_m, relative_permeability)
    z = np.asarray(wave_impedance_ohm, dtype=complex)
    absorption = DB_PER_NEPER * gamma.real * t
    reflection = 20 * np.log10(np.abs((z + eta_s) ** 2 / (4 * z * eta_s)))
    q = (z - eta_s) / (z + eta_s)
    # exp(-2 gamma t) underflows to 0 for thick sheets, where B -> 0 dB: as wanted.
    with np.errstate(under="ignore"):
        multiple = 20 * np.log10(np.abs(1 - q**2 * np.exp(-2 * gamma * t)))
    total = absorption + reflection + multiple
    return SheetShielding(
        np.asarray(absorption, dtype=float),
        np.asarray(reflection, dtype=float),
        np.asarray(multiple, dtype=float),
        np.asarray(total, dtype=float),
    )


def sheet_power_transmission(
    frequency_hz: ArrayLike,
    conductivity_s_m: ArrayLike,
    thickness_m: ArrayLike,
    relative_permeability: ArrayLike = 1.0,
    cos_incidence: ArrayLike = 1.0,
    polarization: str = "worst",
) -> NDArray[np.float64]:
    """Power transmission of a conducting sheet for a plane wave at oblique incidence.

    Parameters
    ----------
    frequency_hz : array_like
        Frequency [Hz].
    conductivity_s_m : array_like
        Conductivity [S m^-1].
    thickness_m : array_like
        Thickness [m].
    relative_permeability : array_like
        Relative permeability [1].
    cos_incidence : array_like
        Cosine of the angle between the ray and the sheet normal [1].
    polarization : {"worst", "te", "tm", "average"}
        TE (E parallel to the sheet), TM, the larger of the two (default, conservative)
        or their mean (random polarisation).

    Returns
    -------
    ndarray
        Transmitted / incident power density [1].

    Notes
    -----
    Schelkunoff's formula (:func:`schelkunoff_sheet_se`) with the transverse wave
    impedance :math:`\\eta_0/\\cos\\theta` (TE) or :math:`\\eta_0\\cos\\theta` (TM).  In a
    metal the refracted wave travels essentially along the normal
    (:math:`|\\gamma| \\gg k_0`), so the slab's own impedance and attenuation keep their
    normal-incidence values; :func:`slab_se_db_skrf` computes the exact oblique slab for
    comparison.  TM transmission grows as the incidence becomes more oblique (the
    reflection term falls by about 20 log10(1 / cos theta)); "worst" therefore means TM.

    References
    ----------
    .. [1] C. R. Paul, *Introduction to Electromagnetic Compatibility*, 2nd ed.,
       Wiley, 2006, ch. 10 (oblique incidence on a shield).
    """
    c = np.clip(np.asarray(cos_incidence, dtype=float), 1e-9, 1.0)
    te = schelkunoff_sheet_se(
        frequency_hz, conductivity_s_m, thickness_m, relative_permeability, ETA0_OHM / c
    ).total_db
    tm = schelkunoff_sheet_se(
        frequency_hz, conductivity_s_m, thickness_m, relative_permeability, ETA0_OHM * c
    ).total_db
    with np.errstate(under="ignore"):
        t_te, t_tm = 10 ** (-te / 10), 10 ** (-tm / 10)
    return _combine_polarizations(t_te, t_tm, polarization)


def _combine_polarizations(t_te: NDArray, t_tm: NDArray, polarization: str) -> NDArray:
    if polarization == "te":
        out = t_te
    elif polarization == "tm":
        out = t_tm
    elif polarization == "worst":
        out = np.maximum(t_te, t_tm)
    elif polarization == "average":
        out = 0.5 * (t_te + t_tm)
    else:
        raise ValueError(f"polarization must be worst, te, tm or average, got {polarization!r}")
    return np.clip(np.asarray(out, dtype=float), 0.0, 1.0)


def _frequency(frequency_hz: float) -> skrf.Frequency:
    """A one-point scikit-rf frequency band, unit given explicitly."""
    f = float(frequency_hz)
    return skrf.Frequency(f, f, 1, unit="Hz")


def slab_network_skrf(
    frequency_hz: float,
    conductivity_s_m: float,
    thickness_m: float,
    relative_permeability: float = 1.0,
    relative_permittivity: float = 1.0,
    incidence_angle_rad: float = 0.0,
    polarization: str = "te",
) -> skrf.Network:
    """A homogeneous slab in free space as a scikit-rf two-port (reference model).

    Parameters
    ----------
    frequency_hz : float
        Frequency [Hz].
    conductivity_s_m : float
        Slab conductivity [S m^-1] (0 for a lossless dielectric).
    thickness_m : float
        Slab thickness [m].
    relative_permeability : float
        Relative permeability [1].
    relative_permittivity : float
        Real relative permittivity of the slab [1].
    incidence_angle_rad : float
        Angle from the normal [rad].
    polarization : {"te", "tm"}
        Polarisation at oblique incidence.

    Returns
    -------
    skrf.Network
        Ports renormalised to the free-space wave impedance of the polarisation.

    Notes
    -----
    The conductor enters as the complex relative permittivity
    :math:`\\varepsilon_r - j\\sigma/(\\omega\\varepsilon_0)` (scikit-rf uses
    :math:`e^{+j\\omega t}`, negative imaginary part lossy).  Normal incidence uses
    ``Freespace(..., z0_port=eta0).line(t, 'm')``.  Oblique incidence uses
    ``DefinedGammaZ0`` with the normal propagation constant
    :math:`\\gamma_z = \\sqrt{\\gamma^2 + k_0^2\\sin^2\\theta}` and the transverse
    impedances :math:`j\\omega\\mu/\\gamma_z` (TE) or :math:`\\gamma_z/(j\\omega\\varepsilon)`
    (TM), ports at :math:`\\eta_0/\\cos\\theta` (TE) or :math:`\\eta_0\\cos\\theta` (TM).
    For very thick metal |S21| underflows to zero: use :func:`schelkunoff_sheet_se`.

    References
    ----------
    .. [1] scikit-rf 2.2 documentation, ``skrf.media.Freespace`` and
       ``skrf.media.DefinedGammaZ0``.
    .. [2] D. M. Pozar, *Microwave Engineering*, 4th ed., Wiley, 2012, sec. 1.8
       (oblique incidence, TE and TM wave impedances).
    """
    freq = _frequency(frequency_hz)
    w = 2 * np.pi * float(frequency_hz)
    ep_r = complex(relative_permittivity) - 1j * float(conductivity_s_m) / (w * constants.epsilon_0)
    if incidence_angle_rad == 0.0:
        media = Freespace(
            freq, ep_r=ep_r, mu_r=complex(relative_permeability), z0_port=ETA0_OHM, rho=None
        )
        return media.line(float(thickness_m), "m")
    k0 = w / C_M_S
    eps = ep_r * constants.epsilon_0
    mu = relative_permeability * constants.mu_0
    gamma = np.sqrt(1j * w * mu * 1j * w * eps)
    gamma = np.where(gamma.real < 0, -gamma, gamma)
    s = math.sin(incidence_angle_rad)
    c = math.cos(incidence_angle_rad)
    gz = np.sqrt(gamma**2 + (k0 * s) ** 2)
    gz = np.where(gz.real < 0, -gz, gz)
    if polarization == "te":
        z_slab, z_port = 1j * w * mu / gz, ETA0_OHM / c
    elif polarization == "tm":
        z_slab, z_port = gz / (1j * w * eps), ETA0_OHM * c
    else:
        raise ValueError(f"polarization must be 'te' or 'tm', got {polarization!r}")
    media = DefinedGammaZ0(freq, z0_port=z_port, z0=np.atleast_1d(z_slab), gamma=np.atleast_1d(gz))
    return media.line(float(thickness_m), "m")


def slab_se_db_skrf(
    frequency_hz: float,
    conductivity_s_m: float,
    thickness_m: float,
    relative_permeability: float = 1.0,
    relative_permittivity: float = 1.0,
    incidence_angle_rad: float = 0.0,
    polarization: str = "te",
) -> float:
    """Shielding effectiveness -20 log10|S21| of the scikit-rf slab [dB].

    Parameters
    ----------
    frequency_hz : float
        Frequency [Hz].
    conductivity_s_m : float
        Conductivity [S m^-1].
    thickness_m : float
        Thickness [m].
    relative_permeability : float
        Relative permeability [1].
    relative_permittivity : float
        Real relative permittivity [1].
    incidence_angle_rad : float
        Angle from the normal [rad].
    polarization : {"te", "tm"}
        Polarisation at oblique incidence.

    Returns
    -------
    float
        SE [dB] (inf where |S21| underflows).
    """
    net = slab_network_skrf(
        frequency_hz,
        conductivity_s_m,
        thickness_m,
        relative_permeability,
        relative_permittivity,
        incidence_angle_rad,
        polarization,
    )
    s21 = abs(complex(net.s[0, 1, 0]))
    return math.inf if s21 == 0 else -20.0 * math.log10(s21)


# ----------------------------------------------------------------------- apertures
def aperture_se_db(frequency_hz: ArrayLike, longest_dimension_m: ArrayLike) -> NDArray[np.float64]:
    """Ott's shielding effectiveness of a single aperture in a large sheet.

    Parameters
    ----------
    frequency_hz : array_like
        Frequency [Hz].
    longest_dimension_m : array_like
        Longest dimension L of the hole or slot (a slot's length, a hole's
        diameter, a rectangle's diagonal) [m].

    Returns
    -------
    ndarray
        :math:`SE = 20\\log_{10}(\\lambda / 2L)` for :math:`L < \\lambda/2`, and 0 dB (no
        credit) for :math:`L \\ge \\lambda/2` [dB].

    Notes
    -----
    The leakage of an aperture depends on its longest dimension, not on its area: a
    long thin slot leaks like a hole of the slot's length.  At and above
    :math:`L = \\lambda/2` (61 mm at 2.45 GHz) the aperture is resonant or larger and
    gets no credit at all.  This is a far-field, plane-wave rule of thumb; see
    :func:`near_field_aperture_se_db` for sources closer than :math:`\\lambda/2\\pi`.
    At 2.45 GHz: L = 5 mm 21.8 dB, 10 mm 15.7 dB, 30 mm 6.2 dB.

    References
    ----------
    .. [1] H. W. Ott, *Electromagnetic Compatibility Engineering*, Wiley, 2009,
       sec. 6.10 (apertures), single-aperture equation.
    """
    lam = C_M_S / _positive(frequency_hz, "frequency_hz")
    length = _positive(longest_dimension_m, "longest_dimension_m")
    ratio = lam / (2 * length)
    return np.where(ratio > 1, 20 * np.log10(np.maximum(ratio, 1.0)), 0.0)


def multiple_aperture_correction_db(count: ArrayLike) -> NDArray[np.float64]:
    """Ott's correction for n identical apertures: -10 log10(n) [dB].

    Parameters
    ----------
    count : array_like
        Number of apertures n >= 1.

    Returns
    -------
    ndarray
        The (negative) change of SE [dB].

    Notes
    -----
    Ott applies it to n holes *in a line* (a row along the field); other texts apply
    it to n identical apertures anywhere on the shield.  keepclear uses the total
    number of apertures in the group, the larger n and so the conservative reading.
    The corrected SE is never taken below 0 dB by the callers.

    References
    ----------
    .. [1] H. W. Ott, *Electromagnetic Compatibility Engineering*, Wiley, 2009,
       sec. 6.10.1 (multiple apertures).
    """
    n = np.asarray(count, dtype=float)
    if np.any(~np.isfinite(n) | (n < 1)):
        raise ModelInputError("count", f"count must be >= 1, got {count!r}")
    return -10 * np.log10(n)


def near_field_aperture_se_db(
    se_far_db: ArrayLike, distance_m: ArrayLike, frequency_hz: ArrayLike
) -> NDArray[np.float64]:
    """Aperture-type shielding for a source closer than lambda / (2 pi).

    Parameters
    ----------
    se_far_db : array_like
        Plane-wave (far-field) SE of the aperture, mesh or perforated panel [dB].
    distance_m : array_like
        Distance from the source to the shield [m].
    frequency_hz : array_like
        Frequency [Hz].

    Returns
    -------
    ndarray
        :math:`\\max(0, SE_{far} - 20\\log_{10}(\\lambda / 2\\pi r))` for
        :math:`r < \\lambda/2\\pi`, else SE_far [dB].

    Notes
    -----
    Close to a magnetic (low-impedance) source the wave impedance is about
    :math:`\\eta_0\\,2\\pi r/\\lambda`, and an aperture's inductive coupling passes
    :math:`\\lambda/2\\pi r` times more field than for a plane wave.  For a single slot
    this is Ott's near-field aperture rule :math:`SE = 20\\log_{10}(\\pi r / L)`, which
    meets the far-field rule at :math:`r = \\lambda/2\\pi`.  The magnetic case is taken
    for every source because it is the lower of the two (an electric source gives more
    shielding near the aperture).

    References
    ----------
    .. [1] H. W. Ott, *Electromagnetic Compatibility Engineering*, Wiley, 2009,
       sec. 6.10 (near-field shielding of apertures, 20 log(pi D / l); from memory).
    """
    lam = C_M_S / np.asarray(frequency_hz, dtype=float)
    r = np.maximum(np.asarray(distance_m, dtype=float), 1e-9)
    loss = 20 * np.log10(np.maximum(lam / (2 * np.pi * r), 1.0))
    return np.maximum(np.asarray(se_far_db, dtype=float) - loss, 0.0)


class Polarizabilities(NamedTuple):
    """Small-aperture polarisabilities (Collin's convention) and area.

    ``magnetic_major_m3`` is for a magnetic field along the aperture's long axis.
    """

    area_m2: float
    electric_m3: float
    magnetic_major_m3: float
    magnetic_minor_m3: float


def circular_aperture_polarizabilities(diameter_m: float) -> Polarizabilities:
    """Bethe polarisabilities of a small circular hole in a thin conducting screen.

    Parameters
    ----------
    diameter_m : float
        Hole diameter [m].

    Returns
    -------
    Polarizabilities
        :math:`\\alpha_e = 2a^3/3`, :math:`\\alpha_m = 4a^3/3` (a = radius) [m^3].

    References
    ----------
    .. [1] H. A. Bethe, "Theory of diffraction by small holes", *Phys. Rev.* 66,
       163-182 (1944), doi:10.1103/PhysRev.66.163.
    .. [2] R. E. Collin, *Field Theory of Guided Waves*, 2nd ed., IEEE Press, 1991,
       ch. 7 (aperture polarisabilities; from memory).
    """
    a = float(_positive(diameter_m, "diameter_m")) / 2
    return Polarizabilities(math.pi * a * a, 2 * a**3 / 3, 4 * a**3 / 3, 4 * a**3 / 3)


def elliptical_aperture_polarizabilities(major_m: float, minor_m: float) -> Polarizabilities:
    """Polarisabilities of a small elliptical aperture in a thin conducting screen.

    Parameters
    ----------
    major_m, minor_m : float
        Full lengths of the major and minor axes [m] (major >= minor).

    Returns
    -------
    Polarizabilities
        [m^3], Collin's convention (circle: 2a^3/3 and 4a^3/3).

    Notes
    -----
    With semi-axes a >= b, eccentricity :math:`e = \\sqrt{1 - b^2/a^2}` and the complete
    elliptic integrals K(e), E(e):
    :math:`\\alpha_e = \\pi a b^2 / (3E)`,
    :math:`\\alpha_{m,major} = \\pi a^3 e^2 / (3(K - E))`,
    :math:`\\alpha_{m,minor} = \\pi a^3 e^2 / (3((a/b)^2 E - K))`.
    A narrow ellipse tends to :math:`\\alpha_{m,major} = \\pi a^3/(3(\\ln(4a/b) - 1))`.

    References
    ----------
    .. [1] R. E. Collin, *Field Theory of Guided Waves*, 2nd ed., IEEE Press, 1991,
       ch. 7 (polarisabilities of elliptical apertures; from memory).
    .. [2] F. De Meulenaere and J. Van Bladel, "Polarizability of some small
       apertures", *IEEE Trans. Antennas Propag.* 25(2), 198-205 (1977),
       doi:10.1109/TAP.1977.1141568.
    """
    a = float(_positive(major_m, "length_m")) / 2
    b = float(_positive(minor_m, "width_m")) / 2
    if b > a:
        a, b = b, a
    ratio = b / a
    e2 = 1.0 - ratio * ratio
    if e2 < 1e-8:
        return circular_aperture_polarizabilities(2 * a)
    k = float(special.ellipk(e2))  # scipy takes the parameter m = e^2
    e = float(special.ellipe(e2))
    alpha_e = math.pi * a * b * b / (3 * e)
    alpha_major = math.pi * a**3 * e2 / (3 * (k - e))
    alpha_minor = math.pi * a**3 * e2 / (3 * (e / (ratio * ratio) - k))
    return Polarizabilities(math.pi * a * b, alpha_e, alpha_major, alpha_minor)


def rectangular_aperture_polarizabilities(length_m: float, width_m: float) -> Polarizabilities:
    """Polarisabilities of a small rectangular aperture or slot (equivalent ellipse).

    Parameters
    ----------
    length_m, width_m : float
        Side lengths [m].

    Returns
    -------
    Polarizabilities
        Of the ellipse with the rectangle's area and aspect ratio; the area returned
        is the rectangle's [m^2].

    Notes
    -----
    The equal-area, equal-aspect ellipse has axes 1.128 times the rectangle's sides,
    so its polarisabilities are larger than those of the inscribed ellipse: a
    conservative stand-in for the rectangle (the practice of power-balance tools;
    common practice, no source for the factor).
    """
    length = float(_positive(length_m, "length_m"))
    width = float(_positive(width_m, "width_m"))
    scale = math.sqrt(4.0 / math.pi)
    pol = elliptical_aperture_polarizabilities(length * scale, width * scale)
    return Polarizabilities(
        length * width, pol.electric_m3, pol.magnetic_major_m3, pol.magnetic_minor_m3
    )


def hole_equivalent_diameter_m(size_m: float, shape: str) -> float:
    """Diameter of the circle used for a round, square or hexagonal hole [m].

    Parameters
    ----------
    size_m : float
        Diameter (round), side (square) or across-flats width (hexagonal) [m].
    shape : {"round", "square", "hexagonal"}
        Hole shape.

    Returns
    -------
    float
        The hole's own diameter, or the *circumscribed* circle of a square (side x
        sqrt 2) or hexagon (across-flats x 2 / sqrt 3): the larger circle has the
        larger polarisabilities and the lower cut-off frequency, so it errs towards
        leakage.
    """
    if shape == "round":
        return float(size_m)
    if shape == "square":
        return float(size_m) * math.sqrt(2.0)
    if shape == "hexagonal":
        return float(size_m) * 2.0 / math.sqrt(3.0)
    raise ModelInputError(
        "hole_shape", f"hole shape must be round, square or hexagonal, got {shape!r}"
    )


# --------------------------------------------------------- waveguide below cut-off
def _skrf_gamma(
    frequency_hz: ArrayLike, build: Callable[[skrf.Frequency], object]
) -> NDArray[np.complex128]:
    """Propagation constant of a scikit-rf medium at each frequency (any shape)."""
    f = np.asarray(frequency_hz, dtype=float)
    uniq, inverse = np.unique(f.ravel(), return_inverse=True)
    freq = skrf.Frequency.from_f(uniq, unit="Hz")
    gamma = np.asarray(build(freq).gamma, dtype=complex).reshape(-1)  # type: ignore[attr-defined]
    return gamma[inverse].reshape(f.shape)


def _cutoff_db(
    gamma: NDArray[np.complex128],
    depth_m: ArrayLike,
    frequency_hz: ArrayLike,
    cutoff_hz: float,
    warn: bool,
    what: str,
) -> NDArray[np.float64]:
    f = np.asarray(frequency_hz, dtype=float)
    above = f >= cutoff_hz
    if warn and np.any(above):
        warnings.warn(
            f"{what}: the frequency {float(np.max(f)):.4g} Hz is at or above the cut-off "
            f"{cutoff_hz:.4g} Hz, so the tube propagates and gets no cut-off credit",
            ModelRangeWarning,
            stacklevel=3,
        )
    depth = _positive(depth_m, "depth_m", allow_zero=True)
    atten = DB_PER_NEPER * np.where(above, 0.0, gamma.real) * depth
    return np.asarray(np.maximum(atten, 0.0), dtype=float)


def circular_cutoff_frequency_hz(diameter_m: ArrayLike) -> NDArray[np.float64]:
    """Cut-off of the TE11 mode of a round tube: 1.8412 c / (pi D) [Hz].

    Parameters
    ----------
    diameter_m : array_like
        Inner diameter [m].

    Returns
    -------
    ndarray
        Cut-off frequency [Hz] (175.7 GHz mm / D).
    """
    return _P11 * C_M_S / (np.pi * _positive(diameter_m, "diameter_m"))


def circular_cutoff_attenuation_db(
    frequency_hz: ArrayLike, diameter_m: float, depth_m: ArrayLike, *, warn: bool = True
) -> NDArray[np.float64]:
    """Attenuation of a round tube below cut-off, from scikit-rf's TE11 constant.

    Parameters
    ----------
    frequency_hz : array_like
        Frequency [Hz].
    diameter_m : float
        Inner diameter D [m].
    depth_m : array_like
        Tube length (depth) d [m].
    warn : bool
        Warn (:class:`ModelRangeWarning`) when the frequency is at or above cut-off.

    Returns
    -------
    ndarray
        :math:`8.686\\,\\Re(\\gamma_{11})\\,d` [dB]; 0 dB at and above cut-off (no credit).

    Notes
    -----
    ``skrf.media.CircularWaveguide(r=D/2, mode_type='te', m=1, n=1, rho=None)``:
    perfectly conducting walls (``rho`` passed explicitly; lossy walls make scikit-rf
    return NaN below cut-off).  Below cut-off :math:`\\gamma` is real, the attenuation
    constant.  It equals the closed form
    :math:`32.0\\,(d/D)\\sqrt{1-(f/f_c)^2}` dB with :math:`f_c = 1.8412c/(\\pi D)`; the
    dominant mode is TE11, the least attenuated one.

    References
    ----------
    .. [1] scikit-rf 2.2, ``skrf.media.CircularWaveguide``.
    .. [2] H. W. Ott, *Electromagnetic Compatibility Engineering*, Wiley, 2009,
       sec. 6.11 (waveguide below cut-off), about 32 dB per diameter of depth.
    """
    d = float(_positive(diameter_m, "diameter_m"))
    gamma = _skrf_gamma(
        frequency_hz,
        lambda fr: CircularWaveguide(
            fr, r=d / 2, mode_type="te", m=1, n=1, ep_r=1, mu_r=1, rho=None
        ),
    )
    return _cutoff_db(
        gamma,
        depth_m,
        frequency_hz,
        float(circular_cutoff_frequency_hz(d)),
        warn,
        f"round tube of diameter {d:g} m",
    )


def rectangular_cutoff_attenuation_db(
    frequency_hz: ArrayLike,
    width_m: float,
    depth_m: ArrayLike,
    height_m: float | None = None,
    *,
    warn: bool = True,
) -> NDArray[np.float64]:
    """Attenuation of a rectangular tube below cut-off, from scikit-rf's TE10 constant.

    Parameters
    ----------
    frequency_hz : array_like
        Frequency [Hz].
    width_m : float
        The larger inner side w (sets the TE10 cut-off c / 2w) [m].
    depth_m : array_like
        Tube length d [m].
    height_m : float, optional
        The smaller side (default w: a square cell); it does not change TE10.
    warn : bool
        Warn when the frequency is at or above cut-off.

    Returns
    -------
    ndarray
        :math:`8.686\\,\\Re(\\gamma_{10})\\,d` [dB]; 0 at and above cut-off.

    Notes
    -----
    ``skrf.media.RectangularWaveguide(a=w, b=h, mode_type='te', m=1, n=0, rho=None)``
    (perfect walls passed explicitly; the library default is copper).  Equals
    :math:`27.3\\,(d/w)\\sqrt{1-(f/f_c)^2}` dB with :math:`f_c = c/2w`.  A slot of
    length L through a wall is such a tube with w = L.

    References
    ----------
    .. [1] scikit-rf 2.2, ``skrf.media.RectangularWaveguide``.
    .. [2] H. W. Ott, *Electromagnetic Compatibility Engineering*, Wiley, 2009,
       sec. 6.11, about 27 dB per width of depth.
    """
    w = float(_positive(width_m, "width_m"))
    h = w if height_m is None else float(_positive(height_m, "height_m"))
    a, b = max(w, h), min(w, h)
    gamma = _skrf_gamma(
        frequency_hz,
        lambda fr: RectangularWaveguide(
            fr, a=a, b=b, mode_type="te", m=1, n=0, ep_r=1, mu_r=1, rho=None
        ),
    )
    return _cutoff_db(
        gamma, depth_m, frequency_hz, C_M_S / (2 * a), warn, f"rectangular tube of width {a:g} m"
    )


def honeycomb_cutoff_attenuation_db(
    frequency_hz: ArrayLike, across_flats_m: float, depth_m: ArrayLike, *, warn: bool = True
) -> NDArray[np.float64]:
    """Attenuation of a hexagonal honeycomb cell below cut-off.

    Parameters
    ----------
    frequency_hz : array_like
        Frequency [Hz].
    across_flats_m : float
        Cell width between opposite flat walls [m].
    depth_m : array_like
        Cell depth [m].
    warn : bool
        Warn when the frequency is at or above cut-off.

    Returns
    -------
    ndarray
        Attenuation [dB].

    Notes
    -----
    The hexagon is replaced by the round tube of its *circumscribed* circle
    (diameter = across-flats x 2/sqrt 3): the larger circle has the lower cut-off
    frequency and the smaller attenuation, so the estimate errs low.  The true hexagon
    lies between its inscribed and circumscribed circles.
    """
    d = hole_equivalent_diameter_m(float(_positive(across_flats_m, "cell_size_m")), "hexagonal")
    return circular_cutoff_attenuation_db(frequency_hz, d, depth_m, warn=warn)


def cutoff_vent_se_db(
    frequency_hz: ArrayLike,
    cell: str,
    cell_size_m: float,
    depth_m: float,
    count: int = 1,
    *,
    warn: bool = True,
) -> NDArray[np.float64]:
    """Ott's estimate for a panel of n waveguide-below-cut-off cells.

    Parameters
    ----------
    frequency_hz : array_like
        Frequency [Hz].
    cell : {"round", "square", "hexagonal"}
        Cell shape.
    cell_size_m : float
        Diameter, side or across-flats width [m].
    depth_m : float
        Cell depth [m].
    count : int
        Number of cells n.
    warn : bool
        Warn when the cells do not cut off.

    Returns
    -------
    ndarray
        :math:`SE = 20\\log_{10}(\\lambda/2L) + A_{depth} - 10\\log_{10} n`, at least 0 [dB],
        L the cell's longest dimension.

    References
    ----------
    .. [1] H. W. Ott, *Electromagnetic Compatibility Engineering*, Wiley, 2009,
       secs. 6.10-6.11 (apertures; waveguide below cut-off).
    """
    longest = hole_equivalent_diameter_m(cell_size_m, cell)
    if cell == "square":
        depth_db = rectangular_cutoff_attenuation_db(frequency_hz, cell_size_m, depth_m, warn=warn)
    elif cell == "hexagonal":
        depth_db = honeycomb_cutoff_attenuation_db(frequency_hz, cell_size_m, depth_m, warn=warn)
    else:
        depth_db = circular_cutoff_attenuation_db(frequency_hz, cell_size_m, depth_m, warn=warn)
    se = aperture_se_db(frequency_hz, longest) + depth_db + multiple_aperture_correction_db(count)
    return np.maximum(se, 0.0)


def _hole_cutoff_db(
    frequency_hz: ArrayLike, size_m: float, shape: str, depth_m: float, warn: bool
) -> NDArray[np.float64]:
    if depth_m <= 0:
        return np.zeros(np.shape(frequency_hz))
    if shape == "square":
        return rectangular_cutoff_attenuation_db(frequency_hz, size_m, depth_m, warn=warn)
    if shape == "hexagonal":
        return honeycomb_cutoff_attenuation_db(frequency_hz, size_m, depth_m, warn=warn)
    return circular_cutoff_attenuation_db(frequency_hz, size_m, depth_m, warn=warn)


# ------------------------------------------------------- perforated plates, meshes
def perforated_plate_power_transmission(
    frequency_hz: float,
    hole_size_m: float,
    pitch_m: float,
    thickness_m: float,
    *,
    hole_shape: str = "round",
    lattice: str = "triangular",
    cos_incidence: ArrayLike = 1.0,
    polarization: str = "worst",
    metal: Metal | None = None,
    warn: bool = True,
) -> NDArray[np.float64]:
    """Power transmission of a large plate perforated with a periodic array of small holes.

    Parameters
    ----------
    frequency_hz : float
        Frequency [Hz].
    hole_size_m : float
        Diameter (round), side (square) or across-flats width (hexagonal) [m].
    pitch_m : float
        Centre-to-centre spacing of neighbouring holes [m].
    thickness_m : float
        Plate thickness: the depth of each hole [m].
    hole_shape : {"round", "square", "hexagonal"}
        Hole shape.
    lattice : {"triangular", "square"}
        Triangular (staggered, 60 degrees) or square arrangement.
    cos_incidence : array_like
        Cosine of the incidence angle [1].
    polarization : {"worst", "te", "tm", "average"}
        Which polarisation to report (default the larger transmission).
    metal : Metal, optional
        Plate metal; when given, the solid sheet's own transmission is added (so the
        plate never shields better than the sheet it is cut from).
    warn : bool
        Warn when the holes do not cut off through the plate thickness.

    Returns
    -------
    ndarray
        Transmitted / incident power density [1].

    Notes
    -----
    The array is an averaged sheet of Bethe dipoles (a *metafilm*), n = 1/A_cell holes
    per unit area, with polarisability densities :math:`\\chi = n\\alpha`.  Its plane-wave
    transmission is

    .. math::

        |T_{TE}|^2 = \\frac{X}{1+X},\\; X = (2k\\chi_m\\cos\\theta)^2; \\qquad
        |T_{TM}|^2 = \\frac{Y}{\\cos^2\\theta + Y},\\;
        Y = (2k(\\chi_m + \\chi_e\\sin^2\\theta))^2,

    i.e. a shunt inductance :math:`\\mu_0\\chi_m` across free space at normal
    incidence.  The published TM form has :math:`\\chi_m - \\chi_e\\sin^2\\theta`; the two
    terms are added here (more transmission, conservative).  Mutual coupling between
    holes (which lowers the effective polarisability) is ignored, also conservative.
    The plate thickness adds the attenuation of each hole's dominant cut-off mode,
    :math:`|T|^2 \\to |T|^2\\,10^{-A_{depth}/10}` (the waveguide-below-cut-off term of the
    literature), and the metal between holes passes its own (tiny) sheet transmission,
    so the result is never below that of the solid sheet.  Square and hexagonal holes
    use their circumscribed circle for the polarisabilities.  Valid for holes and pitch
    well below half a wavelength.

    References
    ----------
    .. [1] C. L. Holloway, M. A. Mohamed, E. F. Kuester and A. Dienstfrey, "Reflection
       and transmission properties of a metafilm", *IEEE Trans. Electromagn. Compat.*
       47(4), 853-865 (2005), doi:10.1109/TEMC.2005.853719.
    .. [2] U. Paoletti, T. Suga and H. Osaka, "Average transmission cross section of
       aperture arrays in electrically large complex enclosures", APEMC 2012, 677-680,
       doi:10.1109/APEMC.2012.6237888, eq. (8).
    .. [3] H. W. Ott, *Electromagnetic Compatibility Engineering*, Wiley, 2009,
       secs. 6.10-6.11 (apertures, depth of a hole below cut-off).
    """
    lam = C_M_S / float(frequency_hz)
    size = float(_positive(hole_size_m, "hole_size_m"))
    pitch = float(_positive(pitch_m, "pitch_m"))
    depth = float(_positive(thickness_m, "thickness_m", allow_zero=True))
    diameter = hole_equivalent_diameter_m(size, hole_shape)
    if size > pitch:
        raise ModelInputError(
            "pitch_m", f"pitch_m ({pitch:g} m) must be at least the hole size ({size:g} m)"
        )
    if pitch >= lam / 2 or diameter >= lam / 2:
        raise ModelInputError(
            "pitch_m",
            f"the aperture-array model needs holes and pitch below half a wavelength "
            f"({lam / 2:.4g} m at {float(frequency_hz):.4g} Hz); got hole {size:g} m, "
            f"pitch {pitch:g} m",
        )
    if lattice == "triangular":
        cell_area = math.sqrt(3.0) / 2 * pitch * pitch
    elif lattice == "square":
        cell_area = pitch * pitch
    else:
        raise ModelInputError("lattice", f"lattice must be triangular or square, got {lattice!r}")
    pol = circular_aperture_polarizabilities(diameter)
    k = 2 * math.pi / lam
    chi_m = pol.magnetic_major_m3 / cell_area
    chi_e = pol.electric_m3 / cell_area
    c = np.clip(np.asarray(cos_incidence, dtype=float), 1e-9, 1.0)
    s2 = 1.0 - c * c
    x = (2 * k * chi_m * c) ** 2
    y = (2 * k * (chi_m + chi_e * s2)) ** 2
    t_te = x / (1 + x)
    t_tm = y / (c * c + y)
    holes = _combine_polarizations(t_te, t_tm, polarization)
    depth_db = _hole_cutoff_db(frequency_hz, size, hole_shape, depth, warn)
    total = holes * 10 ** (-depth_db / 10)
    if metal is not None and depth > 0:
        total = total + sheet_power_transmission(
            frequency_hz,
            metal.conductivity_s_m,
            depth,
            metal.relative_permeability,
            c,
            polarization,
        )
    return np.clip(total, 0.0, 1.0)


def wire_mesh_power_transmission(
    frequency_hz: float,
    pitch_m: float,
    wire_diameter_m: float,
    *,
    cos_incidence: ArrayLike = 1.0,
    polarization: str = "worst",
    metal: Metal | None = None,
) -> NDArray[np.float64]:
    """Power transmission of a bonded square wire mesh (inductive wire grid).

    Parameters
    ----------
    frequency_hz : float
        Frequency [Hz].
    pitch_m : float
        Wire spacing s (centre to centre) [m].
    wire_diameter_m : float
        Wire diameter d [m].
    cos_incidence : array_like
        Cosine of the incidence angle [1].
    polarization : {"worst", "te", "tm", "average"}
        Which polarisation to report.
    metal : Metal, optional
        Wire metal; when given, a solid sheet of the wire's thickness adds its own
        transmission (a cap: never more shielding than that sheet).

    Returns
    -------
    ndarray
        Transmitted / incident power density [1].

    Notes
    -----
    Each polarisation sees the wires parallel to E as a shunt reactance across free
    space, :math:`X/\\eta_0 = (s/\\lambda)\\ln(s/\\pi d)` for :math:`d \\ll s \\ll \\lambda`,
    and :math:`|T|^2 = 1/(1 + (Z/2X)^2)` with the transverse impedance Z =
    eta0/cos(theta) (TE) or eta0 cos(theta) (TM).  The wires must be bonded where they
    cross; an unbonded woven mesh with poor contacts shields less (not modelled).  For
    thick wires (d > 0.2 s) the grid formula fails and the mesh is treated as a plate
    with square holes of side s - d (:func:`perforated_plate_power_transmission`, no
    depth credit).

    References
    ----------
    .. [1] N. Marcuvitz, *Waveguide Handbook*, MIT Radiation Laboratory Series vol. 10,
       McGraw-Hill, 1951, sec. 5.20 (inductive grating of round wires; from memory).
    .. [2] K. F. Casey, "Electromagnetic shielding behavior of wire-mesh screens",
       *IEEE Trans. Electromagn. Compat.* 30(3), 298-306 (1988), doi:10.1109/15.3309.
    """
    lam = C_M_S / float(frequency_hz)
    s = float(_positive(pitch_m, "pitch_m"))
    d = float(_positive(wire_diameter_m, "wire_diameter_m"))
    if d >= s:
        raise ModelInputError(
            "wire_diameter_m", f"wire_diameter_m ({d:g} m) must be less than pitch_m ({s:g} m)"
        )
    if s >= lam / 2:
        raise ModelInputError(
            "pitch_m",
            f"the mesh model needs a pitch below half a wavelength ({lam / 2:.4g} m), got {s:g} m",
        )
    c = np.clip(np.asarray(cos_incidence, dtype=float), 1e-9, 1.0)
    if d > 0.2 * s:
        grid = perforated_plate_power_transmission(
            frequency_hz,
            s - d,
            s,
            0.0,
            hole_shape="square",
            lattice="square",
            cos_incidence=c,
            polarization=polarization,
        )
    else:
        x = ETA0_OHM * (s / lam) * math.log(s / (math.pi * d))
        t_te = 1.0 / (1.0 + (ETA0_OHM / c / (2 * x)) ** 2)
        t_tm = 1.0 / (1.0 + (ETA0_OHM * c / (2 * x)) ** 2)
        grid = _combine_polarizations(t_te, t_tm, polarization)
    if metal is not None:
        grid = grid + sheet_power_transmission(
            frequency_hz, metal.conductivity_s_m, d, metal.relative_permeability, c, polarization
        )
    return np.clip(grid, 0.0, 1.0)


def se_db_from_power_transmission(transmission: ArrayLike) -> NDArray[np.float64]:
    """Shielding effectiveness -10 log10(T) of a power transmission [dB] (inf for T = 0)."""
    t = np.asarray(transmission, dtype=float)
    with np.errstate(divide="ignore"):
        return np.where(t > 0, -10 * np.log10(np.where(t > 0, t, 1.0)), np.inf)


# ------------------------------------------------------- diffraction and averages
def knife_edge_field_ratio(nu: ArrayLike) -> NDArray[np.float64]:
    """Field behind a straight knife edge relative to free space (Fresnel integrals).

    Parameters
    ----------
    nu : array_like
        Fresnel-Kirchhoff parameter :math:`\\nu = h\\sqrt{2(d_1+d_2)/(\\lambda d_1 d_2)}`,
        positive in the shadow [1].

    Returns
    -------
    ndarray
        :math:`|E/E_0| = \\frac{1}{\\sqrt 2}\\sqrt{(1/2 - C(\\nu))^2 + (1/2 - S(\\nu))^2}`
        [1]: 0.5 (-6 dB) on the shadow boundary, about 0.225/nu deep in the shadow.

    References
    ----------
    .. [1] ITU-R Recommendation P.526, *Propagation by diffraction*, sec. 4.1
       (single knife edge; J(nu) is the same quantity in dB, with the approximation
       J = 6.9 + 20 log10(sqrt((nu - 0.1)^2 + 1) + nu - 0.1)).
    """
    s, c = special.fresnel(np.asarray(nu, dtype=float))
    return np.sqrt((0.5 - c) ** 2 + (0.5 - s) ** 2) / math.sqrt(2.0)


_GL_U, _GL_W = np.polynomial.legendre.leggauss(48)
#: Gauss-Legendre nodes and weights on u = cos(theta) in (0, 1) for hemisphere averages.
HEMISPHERE_U: Final[NDArray[np.float64]] = 0.5 * (_GL_U + 1.0)
HEMISPHERE_W: Final[NDArray[np.float64]] = 0.5 * _GL_W


def hemisphere_average(function_of_cos: Callable[[NDArray[np.float64]], ArrayLike]) -> float:
    """Average over a uniformly illuminated hemisphere, weighted by the projected area.

    Parameters
    ----------
    function_of_cos : callable
        f(u) with u = cos(theta) an array in (0, 1), e.g. a power transmission
        averaged over polarisation.

    Returns
    -------
    float
        :math:`\\int_0^1 f(u)\\, 2u\\, du` (1 for f = 1).

    Notes
    -----
    The power crossing a flat surface of area A in a diffuse (reverberant) field of
    scalar power density S_c is :math:`(A S_c/4)\\int_0^1 f(u) 2u\\,du`; this is the
    average the cavity model applies to walls, meshes and aperture arrays.
    """
    values = np.asarray(function_of_cos(HEMISPHERE_U), dtype=float)
    return float(np.sum(HEMISPHERE_W * values * 2 * HEMISPHERE_U))


__all__ = [
    "DB_PER_NEPER",
    "HEMISPHERE_U",
    "HEMISPHERE_W",
    "METALS",
    "METAL_ALIASES",
    "METAL_CHOICES",
    "METAL_NAMES",
    "WORST_METAL",
    "Metal",
    "Polarizabilities",
    "SheetShielding",
    "aperture_se_db",
    "circular_aperture_polarizabilities",
    "circular_cutoff_attenuation_db",
    "circular_cutoff_frequency_hz",
    "cutoff_vent_se_db",
    "elliptical_aperture_polarizabilities",
    "hemisphere_average",
    "hole_equivalent_diameter_m",
    "honeycomb_cutoff_attenuation_db",
    "knife_edge_field_ratio",
    "metal_from_name",
    "multiple_aperture_correction_db",
    "near_field_aperture_se_db",
    "perforated_plate_power_transmission",
    "rectangular_aperture_polarizabilities",
    "rectangular_cutoff_attenuation_db",
    "schelkunoff_sheet_se",
    "se_db_from_power_transmission",
    "sheet_power_transmission",
    "skin_depth_m",
    "slab_network_skrf",
    "slab_se_db_skrf",
    "surface_impedance_ohm",
    "wire_mesh_power_transmission",
]
