"""The open end of a rectangular waveguide carrying the TE10 mode, as an aperture radiator.

References
----------
.. [1] C. A. Balanis, *Antenna Theory: Analysis and Design*, 4th ed., Wiley, 2016,
   sec. 12.5.3 (TE10 distribution), Table 12.1.
"""

from __future__ import annotations

from functools import cached_property
from typing import Final

import numpy as np
from numpy.typing import NDArray

from ..base import C_M_S, ModelInputError, Placement
from ..waveguide import TE10Mode, open_end_reflection, te10_mode, waveguide_dimensions
from .distribution import GROUND_PLANE, HUYGENS, ApertureDistribution, te10_distribution
from .quadrature import gauss_legendre
from .radiator import ApertureRadiator, inside_guide

#: Equivalent-current models of the open end offered by :class:`OpenWaveguide`.
OPEN_END_MODELS: Final[tuple[str, ...]] = ("huygens", "flange")


def feed_guide_length_m(mode: TE10Mode) -> float:
    """Length of feed guide behind an open end or a horn's throat counted as the source [m].

    One guide wavelength lambda_g (the free-space wavelength where the mode does not
    propagate): about the length of a magnetron launcher section (common practice, no
    source).  The scenario does not describe the feed, so this only bounds the region
    marked as inside the source; the fields are not changed by it.
    """
    length = float(mode.guide_wavelength_m)
    return length if np.isfinite(length) and length > 0 else float(C_M_S / mode.frequency_hz)


def open_waveguide_distribution(mode: TE10Mode, model: str = "huygens") -> ApertureDistribution:
    """TE10 aperture distribution of an open guide end.

    Parameters
    ----------
    mode : TE10Mode
        The feeding mode (dimensions, wave impedance).
    model : {"huygens", "flange"}
        ``"huygens"``: E_y = cos(pi x/a), H_x = -E_y / Z_TE10, both equivalent
        currents in free space (the Stratton-Chu aperture integration of the
        TE10 mode); ``"flange"``: the same E_y in an infinite conducting flange,
        magnetic current only (image theory).

    Returns
    -------
    ApertureDistribution
    """
    if model not in OPEN_END_MODELS:
        raise ModelInputError(
            "model", f"model must be one of {', '.join(OPEN_END_MODELS)}, got {model!r}"
        )
    equivalence = HUYGENS if model == "huygens" else GROUND_PLANE
    return te10_distribution(
        mode.broad_m,
        mode.narrow_m,
        mode.wave_impedance_ohm,
        equivalence,
        description=f"TE10 open end ({model})",
    )


def open_waveguide_gain_variants(
    broad_m: float, narrow_m: float, frequency_hz: float
) -> dict[str, float]:
    """Boresight gain of an open guide end under the competing models [dBi].

    Parameters
    ----------
    broad_m, narrow_m : float
        Inner dimensions a and b [m].
    frequency_hz : float
        Frequency [Hz].

    Returns
    -------
    dict
        ``"huygens"``: both currents with H = -E/Z_TE, normalised to the
        power radiated over the whole sphere (the model :class:`OpenWaveguide`
        uses); ``"huygens-front-only"``: the same pattern normalised to the
        power in front alone (information: it does not conserve power);
        ``"flange"``: magnetic current in an infinite flange;
        ``"yaghjian-1"``: E-plane pattern of the Stratton-Chu TE10 integration,
        H-plane pattern of the E-field-only integration, first-order azimuthal
        dependence, power integrated over the whole sphere (a reconstruction
        of the first method of Yaghjian [4]_ from the description on the
        paper's first page, p. 378, which reports about 0.2 dB on-axis
        accuracy against measurements for X-band and larger guides; the
        paper's equations were not read, and the power integrated over the
        forward half-space alone would give about 1.7 dB more, 7.32 dBi for
        WR-340 at 2.45 GHz: see ``validation/README.md``);
        ``"large-aperture"``: (8/pi^2) 4 pi a b / lambda^2 (Balanis, Table 12.1).

    References
    ----------
    .. [4] A. D. Yaghjian, "Approximate formulas for the far field and gain of
       open-ended rectangular waveguide", *IEEE Trans. Antennas Propag.* 32(4),
       378-384 (1984).
    """
    mode = te10_mode(broad_m, narrow_m, frequency_hz)
    wavelength = C_M_S / frequency_hz
    k = 2 * np.pi / wavelength
    out: dict[str, float] = {}
    huygens = ApertureRadiator(frequency_hz, 1.0, open_waveguide_distribution(mode, "huygens"))
    g_total = huygens.boresight_gain()
    out["huygens"] = float(10 * np.log10(g_total))
    out["huygens-front-only"] = float(10 * np.log10(g_total * (1.0 + huygens.back_fraction)))
    flange = ApertureRadiator(frequency_hz, 1.0, open_waveguide_distribution(mode, "flange"))
    out["flange"] = float(10 * np.log10(flange.boresight_gain()))
    # Yaghjian-type first-order azimuthal pattern
    x, w = gauss_legendre(400)
    theta = np.arccos(x)
    s = np.sin(theta)
    r = mode.beta_over_k
    u = k * broad_m * s / 2
    den = (np.pi / 2) ** 2 - u**2
    near = np.abs(den) < 1e-9
    h_factor = np.where(near, np.pi / 4, np.cos(u) / np.where(near, 1.0, den)) * (np.pi / 2) ** 2
    e_factor = np.sinc(k * narrow_m * s / (2 * np.pi))
    e_plane = (1 + r * np.cos(theta)) * e_factor
    h_plane = (1 + r) * np.cos(theta) * h_factor
    power = np.pi * np.sum((np.abs(e_plane) ** 2 + np.abs(h_plane) ** 2) * w)
    out["yaghjian-1"] = float(10 * np.log10(4 * np.pi * (1 + r) ** 2 / power))
    area = broad_m * narrow_m
    out["large-aperture"] = float(10 * np.log10(8 / np.pi**2 * 4 * np.pi * area / wavelength**2))
    return out


class OpenWaveguide(ApertureRadiator):
    """Open end of a rectangular waveguide carrying the TE10 mode.

    Parameters
    ----------
    frequency_hz : float
        Frequency [Hz].
    power_w : float
        Power delivered to the guide while it radiates; all of it is radiated
        (no mismatch loss is subtracted: conservative) [W].
    broad_m : float
        Inner broad dimension a, along local x [m].
    narrow_m : float
        Inner narrow dimension b, along local y (the E-field direction) [m].
    placement : Placement, optional
        Aperture centre and orientation (boresight = local +z, E along +y).
    model : {"huygens", "flange"}
        Equivalent-current model of the open end (default ``"huygens"``).
    method : {"adaptive", "direct"}
        Default quadrature (see :mod:`keepclear.antennas.aperture`).

    Attributes
    ----------
    mode : TE10Mode
        The feeding mode.
    gain_uncertainty_db : float
        Margin [dB] by which the real gain and near field may exceed the
        model (0.8 dB); keep-out estimates add it.

    Notes
    -----
    Aperture field (Balanis, *Antenna Theory*, 4th ed., sec. 12.5.3, TE10
    distribution; Yaghjian [4]_): E_y = E0 cos(pi x / a), H_x = -E_y / Z_TE10
    on |x| <= a/2, |y| <= b/2, z = 0, radiating towards +z.  E0 is set so the
    radiated power equals ``power_w``.

    Model choice.  At 2.45 GHz in WR-340 the boresight gains are (see
    :func:`open_waveguide_gain_variants`): Huygens (both currents, H from
    Z_TE) 6.25 dBi; magnetic current in an infinite flange 6.25 dBi (6.246);
    a Yaghjian-type estimate 5.66 dBi; the large-aperture formula (8/pi^2
    efficiency) 4.04 dBi; about 6-7 dBi is usually quoted for a real open
    guide (from memory).  The model is the power-conserving variant with the
    highest boresight gain, the Huygens aperture: a keep-out distance must not
    shrink because of a model choice.  Normalising its pattern to the power in
    front alone would give 6.85 dBi, but the 15 % it sends backwards would then
    come out of nowhere.  What the model leaves open (the 7 dBi end of the
    quoted range, the ripple a finite flange adds through edge diffraction,
    wall thickness, the higher-order modes at the junction) is put at
    ``gain_uncertainty_db = 0.8`` dB, so that gain plus margin (7.05 dBi)
    covers the top of the quoted range; an estimate, not a bound from a source.

    Behind the aperture plane (z < 0) the Huygens model returns the same
    integral: the Kirchhoff continuation, which sends about 15 % of the front
    power backwards (front-to-back about 15 dB), a generous value for the
    spill-over of a real guide without flange (measured open guides are
    usually quoted at 20 dB or more front-to-back, from memory).  Inside the
    guide body (behind the opening, within its cross-section) the model has
    no meaning; nobody stands there.  The ``"flange"`` model returns zero
    behind the plane.

    The open end mismatch (:attr:`open_end_reflection`, about |Gamma| = 0.22
    for WR-340 at 2.45 GHz, one-mode flanged estimate) is information only:
    ``power_w`` is what is delivered and so radiated.
    """

    kind = "open-waveguide"

    def __init__(
        self,
        frequency_hz: float,
        power_w: float,
        broad_m: float,
        narrow_m: float,
        placement: Placement | None = None,
        *,
        model: str = "huygens",
        method: str = "adaptive",
    ) -> None:
        if not (np.isfinite(frequency_hz) and frequency_hz > 0):
            raise ModelInputError("frequency_hz", f"frequency_hz must be > 0, got {frequency_hz!r}")
        self.mode = te10_mode(broad_m, narrow_m, frequency_hz)
        self.model = model
        super().__init__(
            frequency_hz,
            power_w,
            open_waveguide_distribution(self.mode, model),
            placement,
            method=method,
        )
        self.gain_uncertainty_db = 0.8

    def _local_inside_or_on(
        self, points_local_m: NDArray[np.float64], tolerance_m: float
    ) -> NDArray[np.bool_]:
        """Inside the guide or within ``tolerance_m`` of its walls, behind the open end.

        The guide is taken to run back :func:`feed_guide_length_m` from the aperture
        plane (its length is not a scenario key): points within that length behind the
        opening and within its cross-section (a x b, widened by the tolerance for the
        walls' metal) are inside it.  With the ``"flange"`` model, points within the
        tolerance of the flange plane are on its metal too.
        """
        p = points_local_m
        back = feed_guide_length_m(self.mode)
        inside = (
            (p[:, 2] <= 0.0)
            & (p[:, 2] >= -back - tolerance_m)
            & inside_guide(p, 0.5 * self.broad_m, 0.5 * self.narrow_m, tolerance_m)
        )
        if self.model == "flange":
            inside |= np.abs(p[:, 2]) <= tolerance_m
        return inside

    @classmethod
    def from_name(
        cls,
        frequency_hz: float,
        power_w: float,
        waveguide: str,
        placement: Placement | None = None,
        **options: str,
    ) -> OpenWaveguide:
        """Build from a standard size name (``"WR-340"``), see :func:`waveguide_dimensions`."""
        broad, narrow = waveguide_dimensions(waveguide)
        return cls(frequency_hz, power_w, broad, narrow, placement, **options)

    @property
    def broad_m(self) -> float:
        """Inner broad dimension a [m]."""
        return self.mode.broad_m

    @property
    def narrow_m(self) -> float:
        """Inner narrow dimension b [m]."""
        return self.mode.narrow_m

    @cached_property
    def open_end_reflection(self) -> complex:
        """One-mode flanged estimate of the TE10 reflection at the open end (information)."""
        return open_end_reflection(self.broad_m, self.narrow_m, self.frequency_hz)

    def max_gain(self, samples: int = 0) -> float:
        """Boresight gain (linear): the TE10 aperture without phase error peaks on axis."""
        return self.boresight_gain()
