"""Idealised point source with the same gain in every direction.

The screening model of the trade: a point radiator whose power density is
:math:`S = P G / (4 \\pi r^2)` at every distance.  It has no near field, so it
over-estimates the field close to a small antenna's reactive region only in the
sense that the reactive energy is ignored; use it for screening and for
checks, not for a bench closer than a wavelength.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from .base import ETA0_OHM, ModelInputError, Placement, Radiator, plane_wave_h


class IsotropicSource(Radiator):
    """Point source of gain ``gain_dbi`` in all directions.

    Parameters
    ----------
    frequency_hz : float
        Frequency [Hz] (used for the phase of the field only).
    power_w : float
        Radiated power [W].
    gain_dbi : float
        Gain in every direction [dBi].  A gain other than 0 dBi does not
        conserve power: it stands for "the peak gain of some antenna, applied
        everywhere", the conservative screening assumption.
    placement : Placement
        Position; the local +y axis sets the nominal polarisation.

    Notes
    -----
    :math:`\\mathbf E = \\sqrt{\\eta_0 P G / 4\\pi}\\; e^{-jkr}/r\\; \\hat e`,
    :math:`\\mathbf H = \\hat r \\times \\mathbf E / \\eta_0`, with
    :math:`\\hat e` the local +y axis made transverse to :math:`\\hat r` (local +x
    where +y is along :math:`\\hat r`).  The distance is clamped to at least
    ``1e-3`` wavelength so that the field stays finite at the source point.

    References
    ----------
    .. [1] FCC OET Bulletin 65, Edition 97-01 (1997), eq. (3): S = P G / (4 pi R^2).
    .. [2] C. A. Balanis, *Antenna Theory*, 4th ed., Wiley, 2016, sec. 2.4.
    """

    kind = "isotropic"

    @property
    def main_axis(self) -> None:
        """None: a point source has no axis."""
        return None

    def __init__(
        self,
        frequency_hz: float,
        power_w: float,
        gain_dbi: float = 0.0,
        placement: Placement | None = None,
    ) -> None:
        super().__init__(frequency_hz, power_w, placement)
        if not np.isfinite(gain_dbi) or not -30.0 <= gain_dbi <= 60.0:
            raise ModelInputError("gain_dbi", f"gain_dbi must lie in -30..60 dBi, got {gain_dbi!r}")
        self.gain_dbi = float(gain_dbi)
        self.gain_linear = 10.0 ** (self.gain_dbi / 10.0)

    def _power_changed(self) -> None:
        """Nothing to update: the amplitude follows ``power_w`` on every call."""
        return None

    @property
    def largest_dimension_m(self) -> float:
        """An ideal point source has no size [m]."""
        return 0.0

    def _polarisation(self, unit_r: NDArray[np.float64]) -> NDArray[np.float64]:
        y = np.array([0.0, 1.0, 0.0])
        e = y - (unit_r @ y)[:, None] * unit_r
        norm = np.linalg.norm(e, axis=1)
        fallback = np.array([1.0, 0.0, 0.0]) - unit_r[:, [0]] * unit_r
        e = np.where(norm[:, None] > 1e-9, e, fallback)
        return e / np.linalg.norm(e, axis=1, keepdims=True)

    def _amplitude_v(self) -> float:
        return float(np.sqrt(ETA0_OHM * self.power_w * self.gain_linear / (4 * np.pi)))

    def _local_far_field(self, directions_local: NDArray[np.float64]) -> NDArray[np.complex128]:
        return (self._amplitude_v() * self._polarisation(directions_local)).astype(complex)

    def _local_fields(
        self, points_local_m: NDArray[np.float64]
    ) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
        r = np.linalg.norm(points_local_m, axis=1)
        r_min = 1e-3 * self.wavelength_m
        safe = np.where(r > 0, r, 1.0)
        unit_r = np.where(r[:, None] > 0, points_local_m / safe[:, None], [[0.0, 0.0, 1.0]])
        r = np.maximum(r, r_min)
        phase = np.exp(-1j * self.wavenumber_rad_m * r) / r
        e = self._local_far_field(unit_r) * phase[:, None]
        return e, plane_wave_h(e, unit_r)

    def max_gain(self, samples: int = 0) -> float:
        """The gain is the same everywhere (linear)."""
        return self.gain_linear
