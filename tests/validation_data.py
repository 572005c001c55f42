"""Reader of the stored full-wave reference solutions in ``validation/data/``.

Pure JSON: no openEMS needed. Each file holds one case computed by
``validation/run.py`` (openEMS FDTD); see ``validation/README.md`` for the cases, the
conventions and how to regenerate them. The fields stored are RMS values for one watt
radiated, at FDTD mesh nodes, in the keepclear scenario frame of the case's
``scenario_source_toml``.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from numpy.typing import NDArray

DATA_DIR = Path(__file__).resolve().parent.parent / "validation" / "data"

#: Angle from boresight within which a point counts as "in front" [deg].
FRONT_DEG = 60.0


@dataclass(frozen=True)
class FullWaveCase:
    """One stored full-wave case.

    Attributes
    ----------
    name : str
        Case name (the file stem).
    engine : str
        Solver and version that computed it.
    source_toml : str
        The ``[[source]]`` table (power_w = 1) that describes the geometry in keepclear's keys.
    boresight : ndarray, shape (3,)
        Boresight (aperture normal or probe axis), unit vector.
    positions_m : ndarray, shape (N, 3)
        Sample points [m].
    labels : list of str
        "plane angle distance" of each sample, for messages.
    power_density_w_m2 : ndarray, shape (N,)
        max(|E|^2/eta0, eta0 |H|^2) per radiated watt [W m^-2].
    peak_directivity_dbi : float
        Peak directivity of the nf2ff far field [dBi].
    boresight_directivity_dbi : float
        Directivity along +x [dBi].
    doc : dict
        The whole record.
    """

    name: str
    engine: str
    source_toml: str
    boresight: NDArray[np.float64]
    positions_m: NDArray[np.float64]
    labels: list[str]
    power_density_w_m2: NDArray[np.float64]
    peak_directivity_dbi: float
    boresight_directivity_dbi: float
    doc: dict

    def angles_deg(self) -> NDArray[np.float64]:
        """Angle of each sample from boresight, seen from the origin [deg]."""
        p = self.positions_m
        c = p @ self.boresight / np.linalg.norm(p, axis=1)
        return np.degrees(np.arccos(np.clip(c, -1.0, 1.0)))

    def front(self) -> NDArray[np.bool_]:
        """Samples within :data:`FRONT_DEG` of boresight."""
        return self.angles_deg() <= FRONT_DEG

    def scenario_text(self, name: str = "full-wave validation case") -> str:
        """A complete scenario file with this case's source at 1 W."""
        return f'name = "{name}: {self.name}"\nfrequency_hz = 2.45e9\n\n{self.source_toml}'


def available() -> list[str]:
    """Names of the stored cases."""
    return sorted(p.stem for p in DATA_DIR.glob("*.json"))


def load(name: str) -> FullWaveCase:
    """Read one stored case by name."""
    doc = json.loads((DATA_DIR / f"{name}.json").read_text(encoding="utf-8"))
    samples = doc["samples"]
    return FullWaveCase(
        name=doc["case"],
        engine=doc["engine"],
        source_toml=doc["scenario_source_toml"],
        boresight=np.array([1.0, 0.0, 0.0]),
        positions_m=np.array([s["position_m"] for s in samples], dtype=float),
        labels=[f"{s['plane']} {s['angle_deg']} deg {s['distance_m']} m" for s in samples],
        power_density_w_m2=np.array([s["power_density_w_m2"] for s in samples], dtype=float),
        peak_directivity_dbi=float(doc["directivity"]["peak_dbi"]),
        boresight_directivity_dbi=float(doc["directivity"]["boresight_dbi"]),
        doc=doc,
    )
