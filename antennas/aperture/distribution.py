"""Aperture distributions: the tangential field over a rectangle and its equivalent currents.

An aperture is a rectangle ``|x| <= width/2, |y| <= height/2`` in the plane z = 0 of
the local frame, radiating towards +z, on which the tangential fields E_t and H_t are
known (:class:`ApertureDistribution`).  They are replaced by equivalent surface
currents (Balanis [1]_ sec. 12.2, eqs. (12-3)/(12-4); Harrington's form of the
equivalence principle)

.. math:: \\mathbf J_s = \\hat n \\times \\mathbf H_a,\\qquad
          \\mathbf M_s = -\\hat n \\times \\mathbf E_a,\\qquad \\hat n = \\hat z,

which radiate in free space ("huygens": both currents; the Kirchhoff-Huygens or
Stratton-Chu aperture model), or, for an aperture in an infinite perfectly conducting
plane, as ``2 M_s`` alone by image theory ("ground-plane", Balanis [1]_ sec. 12.5.1
and 12.5.3; no field behind the plane).

References
----------
.. [1] C. A. Balanis, *Antenna Theory: Analysis and Design*, 4th ed., Wiley, 2016,
   ch. 12 (12.2 field equivalence, 12.5 rectangular apertures, Table 12.1).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Final

import numpy as np
from numpy.typing import NDArray

from ..base import ETA0_OHM, ModelInputError

#: Equivalent-current models.
HUYGENS: Final[str] = "huygens"
GROUND_PLANE: Final[str] = "ground-plane"
EQUIVALENCES: Final[tuple[str, ...]] = (HUYGENS, GROUND_PLANE)

FieldFunction = Callable[[NDArray[np.float64], NDArray[np.float64]], tuple[NDArray, NDArray]]


@dataclass(frozen=True)
class ApertureDistribution:
    """Tangential field over a rectangular aperture in z = 0 (local frame).

    Parameters
    ----------
    width_m : float
        Extent along local x [m] (the H-plane / broad direction).
    height_m : float
        Extent along local y [m] (the E-plane / narrow direction).
    field_function : callable
        ``f(x, y) -> (e_t, h_t)`` for broadcastable coordinate arrays [m]
        inside the rectangle; ``e_t`` and ``h_t`` have the broadcast shape
        plus a last axis of 2 (x and y components), complex, in any
        consistent amplitude ([V m^-1] and [A m^-1]; the radiator rescales).
    bandwidth_x_rad_m : float
        Largest spatial angular frequency of the distribution along x (its
        phase slope plus its amplitude variation, e.g. pi/width for a
        cosine) [rad m^-1]; it sets the quadrature order.
    bandwidth_y_rad_m : float
        The same along y [rad m^-1].
    equivalence : {"huygens", "ground-plane"}
        ``"huygens"``: J = n x H and M = -n x E radiating in free space;
        ``"ground-plane"``: 2 M alone, the aperture sits in an infinite
        conducting plane and nothing radiates behind it.
    description : str
        Short text for messages and reports.
    """

    width_m: float
    height_m: float
    field_function: FieldFunction
    bandwidth_x_rad_m: float = 0.0
    bandwidth_y_rad_m: float = 0.0
    equivalence: str = HUYGENS
    description: str = ""

    def __post_init__(self) -> None:
        for key in ("width_m", "height_m"):
            value = getattr(self, key)
            if not (np.isfinite(value) and value > 0):
                raise ModelInputError(key, f"{key} must be a length > 0 [m], got {value!r}")
        if self.equivalence not in EQUIVALENCES:
            raise ModelInputError(
                "equivalence",
                f"equivalence must be one of {', '.join(EQUIVALENCES)}, got {self.equivalence!r}",
            )
        for key in ("bandwidth_x_rad_m", "bandwidth_y_rad_m"):
            value = getattr(self, key)
            if not (np.isfinite(value) and value >= 0):
                raise ModelInputError(key, f"{key} must be >= 0 [rad m^-1], got {value!r}")

    @property
    def half_sizes_m(self) -> tuple[float, float]:
        """Half-width and half-height (L_x, L_y) [m]."""
        return 0.5 * self.width_m, 0.5 * self.height_m

    @property
    def diagonal_m(self) -> float:
        """Largest dimension D of the rectangle (its diagonal) [m]."""
        return float(np.hypot(self.width_m, self.height_m))


def uniform_distribution(
    width_m: float,
    height_m: float,
    wave_impedance_ohm: float = ETA0_OHM,
    equivalence: str = HUYGENS,
) -> ApertureDistribution:
    """Uniform, in-phase aperture: E_y = 1, H_x = -1 / Z_w.

    Parameters
    ----------
    width_m, height_m : float
        Aperture size along x and y [m].
    wave_impedance_ohm : float
        Ratio E_y / (-H_x) on the aperture [ohm].
    equivalence : str
        See :class:`ApertureDistribution`.

    Notes
    -----
    Balanis [1]_ sec. 12.5.1-12.5.2: directivity 4 pi A / lambda^2 in the
    large-aperture limit (aperture efficiency 1, Table 12.1).
    """

    def fields(x: NDArray, y: NDArray) -> tuple[NDArray, NDArray]:
        shape = np.broadcast(x, y).shape
        e = np.zeros(shape + (2,), dtype=complex)
        e[..., 1] = 1.0
        h = np.zeros(shape + (2,), dtype=complex)
        h[..., 0] = -1.0 / wave_impedance_ohm
        return e, h

    return ApertureDistribution(width_m, height_m, fields, 0.0, 0.0, equivalence, "uniform")


def te10_distribution(
    width_m: float,
    height_m: float,
    wave_impedance_ohm: float,
    equivalence: str = HUYGENS,
    phase_x: Callable[[NDArray], NDArray] | None = None,
    phase_y: Callable[[NDArray], NDArray] | None = None,
    phase_slope_x_rad_m: float = 0.0,
    phase_slope_y_rad_m: float = 0.0,
    description: str = "TE10 cosine",
) -> ApertureDistribution:
    """TE10-like aperture: E_y = cos(pi x / width) e^{-j(phi_x(x) + phi_y(y))}, H_x = -E_y / Z_w.

    Parameters
    ----------
    width_m, height_m : float
        Aperture size along x (cosine direction) and y [m].
    wave_impedance_ohm : float
        E_y / (-H_x): Z_TE10 for the open end of a guide, eta0 for a horn
        aperture (Balanis [1]_ sec. 13.4) [ohm].
    equivalence : str
        See :class:`ApertureDistribution`.
    phase_x, phase_y : callable, optional
        Aperture phase lag along x and y [rad] (e.g. a horn's flare phase).
    phase_slope_x_rad_m, phase_slope_y_rad_m : float
        Largest |d phase / dx| and |d phase / dy| over the aperture [rad m^-1].
    description : str
        Short text for messages.

    Notes
    -----
    With no phase this is Balanis [1]_ eq. (12-47) (TE10 distribution),
    aperture efficiency 8/pi^2 in the large-aperture limit (Table 12.1).
    """

    def fields(x: NDArray, y: NDArray) -> tuple[NDArray, NDArray]:
        amplitude = np.cos(np.pi * np.asarray(x) / width_m).astype(complex)
        phase = np.zeros(np.broadcast(x, y).shape)
        if phase_x is not None:
            phase = phase + phase_x(np.asarray(x))
        if phase_y is not None:
            phase = phase + phase_y(np.asarray(y))
        ey = amplitude * np.exp(-1j * phase)
        shape = ey.shape
        e = np.zeros(shape + (2,), dtype=complex)
        e[..., 1] = ey
        h = np.zeros(shape + (2,), dtype=complex)
        h[..., 0] = -ey / wave_impedance_ohm
        return e, h

    return ApertureDistribution(
        width_m,
        height_m,
        fields,
        np.pi / width_m + phase_slope_x_rad_m,
        phase_slope_y_rad_m,
        equivalence,
        description,
    )


def equivalent_currents(
    e_t: NDArray, h_t: NDArray, equivalence: str
) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
    """Equivalent surface currents of an aperture field in z = 0, normal +z.

    Parameters
    ----------
    e_t, h_t : ndarray, shape (..., 2)
        Tangential aperture E [V m^-1] and H [A m^-1] (x and y components).
    equivalence : {"huygens", "ground-plane"}
        Free-space Huygens sources, or 2 M over a conducting plane.

    Returns
    -------
    j_s, m_s : ndarray, shape (..., 2)
        Electric [A m^-1] and magnetic [V m^-1] surface currents (x, y).

    Notes
    -----
    J_s = z x H_a = (-H_y, H_x); M_s = -z x E_a = (E_y, -E_x)
    (Balanis [1]_ eqs. (12-3), (12-4)); ground plane: J_s = 0, M_s doubled
    (image theory, Balanis sec. 12.5.1).
    """
    e_t = np.asarray(e_t, dtype=complex)
    h_t = np.asarray(h_t, dtype=complex)
    m_s = np.stack([e_t[..., 1], -e_t[..., 0]], axis=-1)
    if equivalence == GROUND_PLANE:
        return np.zeros_like(m_s), np.asarray(2.0 * m_s, dtype=complex)
    j_s = np.stack([-h_t[..., 1], h_t[..., 0]], axis=-1)
    return j_s, m_s
