#!/usr/bin/python3
"""Full-wave (FDTD, openEMS) reference solutions for keepclear's source models.

Regenerates the reduced data in ``validation/data/<case>.json``. Not part of CI: it needs
openEMS and its Python bindings (Debian packages ``openems``, ``python3-openems``,
``python3-h5py``; the bindings are built for the system interpreter ``/usr/bin/python3``).

Usage::

    /usr/bin/python3 validation/run.py --case all            # every case, both meshes
    /usr/bin/python3 validation/run.py --case guide-wr340    # one case, both meshes
    /usr/bin/python3 validation/run.py --case plate-probe --mesh coarse   # quick check only

Conventions (written once, used everywhere below)
-------------------------------------------------
* Scenario frame of keepclear: metres, right-handed, the source's reference point at the
  origin, its boresight (aperture normal, or probe axis) along +x, the aperture E field
  (the guide's narrow wall, or the box face's height edge) along +z, the broad wall
  (the face's width) along +y.
* openEMS takes a discrete Fourier transform with ``exp(-j w t)``: phasors follow the
  ``exp(+j w t)`` time convention and are PEAK amplitudes. Every power is
  ``0.5 Re(...)`` of peak phasors; every RMS field stored is ``|peak| / sqrt(2)``.
* Stored near fields are RMS values for ONE WATT RADIATED: the peak phasors are divided by
  ``sqrt(P_rad)`` with ``P_rad`` the Poynting flux through the closed nf2ff box.

Symmetry
--------
The open guide and the horn are fed by a TE10 current sheet and have two symmetry planes:
y = 0 is a magnetic wall (PMC: tangential H vanishes) and z = 0 an electric wall (PEC:
tangential E vanishes). Only the quarter y >= 0, z >= 0 is computed; the near-field to
far-field transform mirrors the surface currents, and closed-surface fluxes are four times
the quarter's. openEMS applies the magnetic wall half a cell inside the
domain (it zeroes the tangential H on the first dual line), so the mesh's first cell is
centred on y = 0. The probes on a plate or box are fed by openEMS's lumped port and computed
in the full domain (no mirror plane crosses a port).
"""

from __future__ import annotations

import argparse
import json
import os
import re
import shutil
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

# The packaged port classes still use the aliases that numpy 1.24 removed.
np.__dict__.setdefault("float", float)
np.__dict__.setdefault("int", int)

import h5py  # noqa: E402
from CSXCAD import ContinuousStructure  # noqa: E402
from CSXCAD.SmoothMeshLines import SmoothMeshLines  # noqa: E402
from openEMS import openEMS  # noqa: E402
from openEMS.utilities import DFT_time2freq  # noqa: E402

C0 = 299_792_458.0
MU0 = 4e-7 * np.pi
EPS0 = 1.0 / (MU0 * C0**2)
ETA0 = float(np.sqrt(MU0 / EPS0))
F0 = 2.45e9
LAM = C0 / F0

HERE = Path(__file__).resolve().parent
DATA = HERE / "data"
MESHES = {"coarse": 12, "medium": 15, "fine": 25}  # max cell = lambda / N in air
CONVERGENCE = ("medium", "fine")
PML_CELLS = 8
END_CRITERION = 1e-4  # energy decay to -40 dB of its peak
MAX_STEPS = 60000
THREADS = 2

FACES = [(ax, side) for ax in range(3) for side in (0, 1)]
WR = {"WR-340": (0.08636, 0.04318), "WR-430": (0.10922, 0.05461)}
WALL_M = 0.002


# ---------------------------------------------------------------------------------------
# cases
# ---------------------------------------------------------------------------------------
def te10_beta_and_guide_wavelength(broad_m: float) -> tuple[float, float]:
    """TE10 phase constant [rad/m] and guide wavelength [m] of a guide ``broad_m`` wide.

    beta = sqrt(k^2 - (pi / a)^2) (Pozar, *Microwave Engineering*, 4th ed., sec. 3.3).
    """
    beta = float(np.sqrt((2 * np.pi / LAM) ** 2 - (np.pi / broad_m) ** 2))
    return beta, 2 * np.pi / beta


def guide_case(name: str, size: str, flange: tuple[float, float] | None = None) -> dict:
    """An open guide of a standard size, closed by a short 0.30 m behind its aperture."""
    a, b = WR[size]
    beta, lam_g = te10_beta_and_guide_wavelength(a)
    length = 0.30  # guide length from the back short to the aperture (>= 1.5 guide wavelengths)
    source = {
        "antenna": "open-waveguide",
        "power_w": 1.0,
        "position_m": [0.0, 0.0, 0.0],
        "boresight": [1.0, 0.0, 0.0],
        "polarization": [0.0, 0.0, 1.0],
        "waveguide": size,
    }
    if flange is not None:
        source["flange_m"] = list(flange)
    return {
        "name": name,
        "kind": "guide",
        "description": (
            f"Open-ended {size} guide ({a * 1e3:.2f} x {b * 1e3:.2f} mm inner), "
            f"{WALL_M * 1e3:.0f} mm perfectly conducting walls, "
            + (
                f"flange {flange[0]} m (along the broad wall, y) x {flange[1]} m (along the "
                f"E field, z), a {WALL_M * 1e3:.0f} mm perfectly conducting plate whose front "
                "face is the aperture plane, "
                if flange
                else "no flange, "
            )
            + f"{length:.2f} m long ({length / lam_g:.2f} guide wavelengths) and closed by a "
            "short at the back; TE10 fed by a current sheet a quarter guide wavelength in "
            "front of the short."
        ),
        "a": a,
        "b": b,
        "length": length,
        "lam_g": lam_g,
        "beta": beta,
        "flange": flange,
        "radii": [0.1, 0.2, 0.3, 0.4],
        "symmetric": True,
        "fc": 0.6e9,
        "source": source,
    }


def horn_case(name: str = "horn-wr340", flange: tuple[float, float] | None = None) -> dict:
    """The pyramidal horn on WR-340 (our own proportions), bare or on a flange."""
    a, b = WR["WR-340"]
    beta, lam_g = te10_beta_and_guide_wavelength(a)
    source = {
        "antenna": "horn",
        "power_w": 1.0,
        "position_m": [0.0, 0.0, 0.0],
        "boresight": [1.0, 0.0, 0.0],
        "polarization": [0.0, 0.0, 1.0],
        "waveguide": "WR-340",
        "length_m": 0.30,
        "aperture_width_m": 0.24,
        "aperture_height_m": 0.18,
    }
    if flange is not None:
        source["flange_m"] = list(flange)
    return {
        "name": name,
        "kind": "horn",
        "description": (
            "Pyramidal horn on WR-340: aperture 0.24 m (broad, H-plane) x 0.18 m (E-plane), "
            "axial length 0.30 m from throat to aperture, 2 mm perfectly conducting walls, "
            + (
                f"flange {flange[0]} m (along the broad wall, y) x {flange[1]} m (along the "
                f"E field, z), a {WALL_M * 1e3:.0f} mm perfectly conducting plate whose front "
                "face is the aperture plane; "
                if flange
                else "no flange; "
            )
            + "fed by a 0.12 m WR-340 section closed by a short, TE10 current sheet a "
            "quarter guide wavelength in front of the short."
        ),
        "flange": flange,
        "a": a,
        "b": b,
        "aperture": (0.24, 0.18),
        "horn_length": 0.30,
        "feed_length": 0.12,
        "lam_g": lam_g,
        "beta": beta,
        "radii": [0.1, 0.2, 0.3],
        "extra_behind": [0.45],
        "symmetric": True,
        "fc": 0.6e9,
        "source": source,
    }


def probe_case(
    name: str,
    ground: str,
    size: tuple[float, float],
    depth: float = 0.0,
    offset: tuple[float, float] = (0.0, 0.0),
) -> dict:
    """A 30 mm monopole on a plate or through the front face of a closed box."""
    source = {
        "antenna": "monopole",
        "power_w": 1.0,
        "position_m": [0.0, 0.0, 0.0],
        "axis": [1.0, 0.0, 0.0],
        "length_m": 0.030,
        "ground": ground,
        "ground_size_m": list(size),
        "ground_up": [0.0, 0.0, 1.0],
        "ground_offset_m": list(offset),
    }
    if ground == "box":
        source["box_depth_m"] = depth
    what = (
        f"closed perfectly conducting box, front face {size[0]} m (width, along +y) x "
        f"{size[1]} m (height, along +z), depth {depth} m behind the face"
        if ground == "box"
        else f"thin (zero-thickness) perfectly conducting square plate {size[0]} x {size[1]} m"
    )
    return {
        "name": name,
        "kind": "probe",
        "description": (
            "30 mm monopole (square wire 2 x 2 mm, equivalent radius 1.2 mm) standing on the "
            f"centre of the face of a {what}; the wire runs along +x; fed by a 50 ohm lumped "
            "port in a 2 mm gap at its base."
            + (f" Probe offset {offset} m from the face centre." if any(offset) else "")
        ),
        "ground": ground,
        "size": size,
        "depth": depth,
        "offset": offset,
        "height": 0.030,
        "gap": 0.002,
        "wire_half": 0.001,
        "radii": [0.1, 0.2, 0.3],
        "symmetric": False,
        "fc": 1.0e9,
        "source": source,
    }


CASES = {
    "guide-wr340": lambda: guide_case("guide-wr340", "WR-340"),
    "horn-wr340": horn_case,
    "box-probe": lambda: probe_case("box-probe", "box", (0.20, 0.09), 0.15),
    "plate-probe": lambda: probe_case("plate-probe", "plate", (0.25, 0.25)),
    "guide-wr430": lambda: guide_case("guide-wr430", "WR-430"),
    "flanged-wr340": lambda: guide_case("flanged-wr340", "WR-340", flange=(0.25, 0.20)),
    "box-probe-offset": lambda: probe_case(
        "box-probe-offset", "box", (0.20, 0.09), 0.15, offset=(0.05, 0.0)
    ),
    "flanged-horn-wr340": lambda: horn_case("flanged-horn-wr340", flange=(0.36, 0.27)),
}


# ---------------------------------------------------------------------------------------
# sample points
# ---------------------------------------------------------------------------------------
ANGLES_DEG = [0, 30, 45, 60, 90, 120, 135, 150, 180]


def nominal_points(case: dict) -> list[dict]:
    """Sample points: E plane (xz) and H plane (xy) at angles from boresight, a few off them.

    Each carries its plane, angle from boresight and distance from the origin.
    """
    pts = []
    for r in case["radii"]:
        for plane, (u, v) in (("E", (0, 2)), ("H", (0, 1))):
            for ang in ANGLES_DEG:
                if plane == "H" and ang in (0, 180):
                    continue  # already in the E-plane list
                p = np.zeros(3)
                p[u] = r * np.cos(np.radians(ang))
                p[v] = r * np.sin(np.radians(ang))
                pl = plane if ang not in (0, 180) else "axis"
                pts.append({"plane": pl, "angle_deg": ang, "distance_m": r, "nominal": p})
    for r in case.get("extra_behind", []):
        pts.append(
            {
                "plane": "axis",
                "angle_deg": 180,
                "distance_m": r,
                "nominal": np.array([-r, 0.0, 0.0]),
            }
        )
    for d in ([1, 1, 1], [-1, 1, 1], [0, 1, 1]):
        r = 0.2
        v = np.array(d, float) / np.linalg.norm(d)
        ang = float(np.degrees(np.arccos(v[0])))
        pts.append(
            {"plane": "diagonal", "angle_deg": round(ang, 2), "distance_m": r, "nominal": r * v}
        )
    return pts


def inside_metal(case: dict, p: np.ndarray, margin: float = 0.005) -> bool:
    """True for a point inside the source's metal or its interior, or within ``margin``."""
    x, y, z = p
    if case["kind"] in ("guide", "horn") and case["flange"]:
        fw, fh = case["flange"]  # the plate: x from -WALL_M to 0, |y| <= fw/2, |z| <= fh/2
        if (
            -WALL_M - margin <= x <= margin
            and abs(y) <= fw / 2 + margin
            and abs(z) <= fh / 2 + margin
        ):
            return True
    if case["kind"] == "guide":
        a, b, L = case["a"], case["b"], case["length"]
        return (
            -L - WALL_M - margin <= x <= margin
            and abs(y) <= a / 2 + WALL_M + margin
            and abs(z) <= b / 2 + WALL_M + margin
        )
    if case["kind"] == "horn":
        a, b = case["a"], case["b"]
        A, B = case["aperture"]
        L, Lf = case["horn_length"], case["feed_length"]
        if -L - Lf - WALL_M - margin <= x <= -L:
            return abs(y) <= a / 2 + WALL_M + margin and abs(z) <= b / 2 + WALL_M + margin
        if -L <= x <= margin:
            s = min(1.0, (x + L) / L)
            w = a / 2 + (A / 2 - a / 2) * s + WALL_M + margin
            h = b / 2 + (B / 2 - b / 2) * s + WALL_M + margin
            return abs(y) <= w and abs(z) <= h
        return False
    # probe
    w, h = case["size"]
    oy, oz = case["offset"]
    if case["ground"] == "box":
        d = case["depth"]
        inside_y = abs(y + oy) <= w / 2 + margin
        if -d - margin <= x <= margin and inside_y and abs(z + oz) <= h / 2 + margin:
            return True
    else:
        if abs(x) <= margin and abs(y + oy) <= w / 2 + margin and abs(z + oz) <= h / 2 + margin:
            return True
    return bool(-margin <= x <= case["height"] + margin and np.hypot(y, z) <= 0.001 + margin)


# ---------------------------------------------------------------------------------------
# geometry and mesh
# ---------------------------------------------------------------------------------------
def domain_extent(case: dict) -> tuple[np.ndarray, np.ndarray]:
    """Corners of the region that must be free of PML: the samples and the metal [m]."""
    rmax = max(case["radii"])
    lo = np.array([-max([rmax, *case.get("extra_behind", [])]), -rmax, -rmax])
    hi = np.array([rmax, rmax, rmax])
    if case["kind"] == "guide":
        lo[0] = min(lo[0], -case["length"] - WALL_M - 0.05)
    if case["kind"] == "horn":
        lo[0] = min(lo[0], -case["horn_length"] - case["feed_length"] - WALL_M - 0.05)
    if case["symmetric"]:
        lo[1] = lo[2] = 0.0
    return lo, hi


def fixed_lines(case: dict) -> list[list[float]]:
    """Mesh lines every geometry edge needs, per axis."""
    L = [[0.0], [0.0], [0.0]]
    t = WALL_M
    if case["kind"] == "guide":
        a, b, Lg = case["a"], case["b"], case["length"]
        L[0] += [-Lg - t, -Lg, -Lg + case["lam_g"] / 4, -0.15]
        L[1] += [a / 2, a / 2 + t]
        L[2] += [b / 2, b / 2 + t]
    elif case["kind"] == "horn":
        a, b = case["a"], case["b"]
        Lh, Lf = case["horn_length"], case["feed_length"]
        L[0] += [-Lh - Lf - t, -Lh - Lf, -Lh - Lf + case["lam_g"] / 4, -Lh - 0.03, -Lh]
        L[1] += [a / 2, a / 2 + t]
        L[2] += [b / 2, b / 2 + t]
    else:
        w, h = case["size"]
        oy, oz = case["offset"]
        wh = case["wire_half"]
        L[0] += [case["gap"], case["height"]]
        L[1] += [-wh, wh, -oy - w / 2, -oy + w / 2]
        L[2] += [-wh, wh, -oz - h / 2, -oz + h / 2]
        if case["ground"] == "box":
            L[0] += [-case["depth"]]
        L[1].remove(0.0)
        L[2].remove(0.0)
    if case["kind"] in ("guide", "horn") and case["flange"]:
        L[0] += [-t]  # the plate: x from -t to 0, its edges at |y| = w/2, |z| = h/2
        L[1] += [case["flange"][0] / 2]
        L[2] += [case["flange"][1] / 2]
    return L


MIN_GAP_M = 0.0012  # lines closer than this are merged (keeps the time step reasonable)


def merge_close(lines: list[float], keep: set[float], gap: float) -> list[float]:
    """Drop lines closer than ``gap`` to a neighbour, keeping geometry lines in ``keep``."""
    out: list[float] = []
    for v in sorted(lines):
        if out and v - out[-1] < gap:
            if v in keep and out[-1] not in keep:
                out[-1] = v
            continue
        out.append(v)
    return out


def symmetry_half_cell(case: dict) -> float:
    """Half the first cell at the magnetic symmetry wall y = 0 [m]."""
    return case["a"] / 2 / 21


def build_mesh(case: dict, n_per_lambda: int) -> tuple[list[np.ndarray], dict]:
    """Graded rectilinear mesh with a maximum cell of lambda / n_per_lambda in air."""
    dmax = LAM / n_per_lambda
    lo, hi = domain_extent(case)
    margin = 2 * dmax
    lines = []
    fixed = fixed_lines(case)
    for ax in range(3):
        lo_b = lo[ax] - margin - PML_CELLS * dmax
        if case["symmetric"] and ax == 2:
            lo_b = 0.0  # electric wall: openEMS zeroes tangential E on the first line
        if case["symmetric"] and ax == 1:
            # magnetic wall: openEMS zeroes tangential H on the first dual line, half a cell
            # inside the domain; the first cell is centred on y = 0 so the wall lies at y = 0
            lo_b = -symmetry_half_cell(case)
        hi_b = hi[ax] + margin + PML_CELLS * dmax
        f = sorted({round(v, 6) for v in fixed[ax] + [lo_b, hi_b] if lo_b <= v <= hi_b})
        if case["kind"] == "horn" and ax > 0:
            # fine band where the slanted walls run: every column crosses at least one line
            # inside a 2 mm wall, so the staircased walls are closed
            a_or_b = case["a"] if ax == 1 else case["b"]
            big = case["aperture"][ax - 1]
            band = np.arange(a_or_b / 2, big / 2 + WALL_M + 0.0125, 0.0015)
            f = sorted(set(f) | {round(v, 6) for v in band})
        if case["kind"] in ("guide", "horn") and ax > 0:
            # the guide's cross-section resolved on every mesh: 20 cells across each
            # dimension, so the TE10 power through it integrates accurately
            half = (case["a"] if ax == 1 else case["b"]) / 2
            inner = np.linspace(-half, half, 22)  # 21 cells: y = 0 is a cell centre
            f = sorted(set(f) | {round(v, 6) for v in inner if lo_b <= v <= hi_b})
        if case["kind"] == "probe" and ax == 0:
            f = sorted(set(f) | {round(v, 6) for v in np.arange(0.0, case["height"], 0.002)})
        if case["symmetric"] and ax == 1:
            f = [v for v in f if abs(v) > 1e-9]  # y = 0 is a cell centre, not a line
        f = merge_close(f, set(round(v, 6) for v in fixed[ax]), MIN_GAP_M)
        ln = SmoothMeshLines(np.array(f), dmax, ratio=1.4)
        lines.append(np.unique(np.round(np.asarray(ln), 7)))
    info = {
        "max_cell_m": dmax,
        "lambda_over": n_per_lambda,
        "smallest_cell_m": float(min(np.min(np.diff(ln)) for ln in lines)),
        "lines": [len(ln) for ln in lines],
        "cells": int(np.prod([len(ln) - 1 for ln in lines])),
    }
    return lines, info


def add_geometry(case: dict, CSX, FDTD, lines) -> dict:  # noqa: ANN001
    """Metal, the feed and what the post-processing needs to know of them."""
    pec = CSX.AddMetal("pec")
    t = WALL_M
    out: dict = {}
    if case["kind"] in ("guide", "horn"):
        a, b = case["a"], case["b"]
        if case["kind"] == "guide":
            x0, x1 = -case["length"], 0.0
        else:
            x0, x1 = -case["horn_length"] - case["feed_length"], -case["horn_length"]
        # straight guide: four walls and the back short (boxes symmetric about y = z = 0)
        pec.AddBox([x0 - t, -a / 2 - t, b / 2], [x1, a / 2 + t, b / 2 + t], priority=10)
        pec.AddBox([x0 - t, -a / 2 - t, -b / 2 - t], [x1, a / 2 + t, -b / 2], priority=10)
        pec.AddBox([x0 - t, a / 2, -b / 2 - t], [x1, a / 2 + t, b / 2 + t], priority=10)
        pec.AddBox([x0 - t, -a / 2 - t, -b / 2 - t], [x1, -a / 2, b / 2 + t], priority=10)
        pec.AddBox([x0 - t, -a / 2 - t, -b / 2 - t], [x0, a / 2 + t, b / 2 + t], priority=10)
        if case["kind"] == "guide" and case["flange"]:
            fw, fh = case["flange"]
            pec.AddBox([-t, -fw / 2, -fh / 2], [0.0, fw / 2, fh / 2], priority=10)
            air = CSX.AddMaterial("opening", epsilon=1.0)
            air.AddBox([-t, -a / 2, -b / 2], [0.0, a / 2, b / 2], priority=20)
        if case["kind"] == "horn":
            add_horn_walls(case, pec, lines)
            if case["flange"]:
                fw, fh = case["flange"]
                big_a, big_b = case["aperture"]
                pec.AddBox([-t, -fw / 2, -fh / 2], [0.0, fw / 2, fh / 2], priority=10)
                air = CSX.AddMaterial("opening", epsilon=1.0)
                air.AddBox([-t, -big_a / 2, -big_b / 2], [0.0, big_a / 2, big_b / 2], priority=20)
        # TE10 current sheet a quarter guide wavelength in front of the short
        xs = x0 + case["lam_g"] / 4
        xs = float(lines[0][np.argmin(np.abs(lines[0] - xs))])
        exc = CSX.AddExcitation("te10", exc_type=0, exc_val=[0, 0, 1])
        exc.SetWeightFunction(["0", "0", f"cos({np.pi / a!r}*y)"])
        exc.AddBox([xs, -a / 2, -b / 2], [xs, a / 2, b / 2], priority=30)
        # the guide's cross-section where the accepted power is measured, and an axial line
        xm = -0.15 if case["kind"] == "guide" else -case["horn_length"] - 0.03
        xm = float(lines[0][np.argmin(np.abs(lines[0] - xm))])
        for kind, dt in (("E", 10), ("H", 11)):
            d = CSX.AddDump(f"port_{kind}", dump_type=dt, dump_mode=1, file_type=1, frequency=[F0])
            d.AddBox([xm, symmetry_half_cell(case) / 2, 0.0], [xm, a / 2, b / 2])
        out.update(source_plane_m=xs, port_plane_m=xm)
        # Ez along the axis between the sheet and the aperture (or throat), for |S11|
        x_end = -0.04 if case["kind"] == "guide" else -case["horn_length"] - 0.01
        xl = lines[0][(lines[0] > xs + case["lam_g"] / 8) & (lines[0] < x_end)]
        yl = float(lines[1][1])
        zl = float(lines[2][1])
        names = []
        for i, x in enumerate(xl):
            nm = f"axis_{i:03d}"
            pr = CSX.AddProbe(nm, p_type=2)
            pr.AddBox([x, yl, zl], [x, yl, zl])
            names.append((nm, float(x)))
        out["axis_probes"] = names
        out["axis_yz"] = (yl, zl)
        # reference plane of |S11|: the aperture (guide) or the throat (horn)
        out["s11_plane_m"] = 0.0 if case["kind"] == "guide" else -case["horn_length"]
    else:
        w, h = case["size"]
        oy, oz = case["offset"]
        wh, g, H = case["wire_half"], case["gap"], case["height"]
        if case["ground"] == "box":
            pec.AddBox(
                [-case["depth"], -oy - w / 2, -oz - h / 2],
                [0.0, -oy + w / 2, -oz + h / 2],
                priority=10,
            )
        else:
            pec.AddBox(
                [0.0, -oy - w / 2, -oz - h / 2], [0.0, -oy + w / 2, -oz + h / 2], priority=10
            )
        pec.AddBox([g, -wh, -wh], [H, wh, wh], priority=10)
        port = FDTD.AddLumpedPort(
            1, 50.0, [0.0, -wh, -wh], [g, wh, wh], "x", excite=1.0, priority=20
        )
        out["port"] = port
    return out


def add_horn_walls(case: dict, pec, lines) -> None:  # noqa: ANN001
    """Staircase the flare's walls on the mesh.

    For each x cell the inner surface is the mesh line nearest the as-built inner surface and
    the wall is at least one cell thick, so the staircase is closed.
    """
    a, b = case["a"], case["b"]
    A, B = case["aperture"]
    L = case["horn_length"]
    xl = lines[0][(lines[0] >= -L - 1e-9) & (lines[0] <= 1e-9)]
    yl, zl = lines[1], lines[2]

    def snap(ln: np.ndarray, inner: float) -> tuple[float, float]:
        i = int(np.argmin(np.abs(ln - inner)))
        j = int(np.argmin(np.abs(ln - (inner + WALL_M))))
        j = max(j, i + 1)
        return float(ln[i]), float(ln[j])

    for x0, x1 in zip(xl[:-1], xl[1:], strict=True):
        s = (0.5 * (x0 + x1) + L) / L
        yi, yo = snap(yl, a / 2 + (A / 2 - a / 2) * s)
        zi, zo = snap(zl, b / 2 + (B / 2 - b / 2) * s)
        pec.AddBox([x0, yi, -zo], [x1, yo, zo], priority=10)
        pec.AddBox([x0, -yo, -zo], [x1, -yi, zo], priority=10)
        pec.AddBox([x0, -yo, zi], [x1, yo, zo], priority=10)
        pec.AddBox([x0, -yo, -zo], [x1, yo, -zi], priority=10)


def snap_points(case: dict, lines, pts: list[dict]) -> list[dict]:
    """Move each sample to the nearest mesh node (off the symmetry planes by one line)."""
    kept = []
    seen = set()
    for p in pts:
        idx = []
        for ax in range(3):
            target = p["nominal"][ax]
            if case["symmetric"] and ax > 0:
                target = abs(target)
            i = int(np.argmin(np.abs(lines[ax] - target)))
            if case["symmetric"] and ax > 0 and i == 0:
                i = 1
            idx.append(i)
        if tuple(idx) in seen:
            continue
        q = np.array([lines[ax][idx[ax]] for ax in range(3)])
        if inside_metal(case, q) or inside_metal(case, p["nominal"]):
            continue
        seen.add(tuple(idx))
        kept.append({**p, "position": q})
    return kept


def h_probe_position(case: dict, lines, q: np.ndarray) -> np.ndarray:
    """Where the H probe of the sample at ``q`` sits: ``q``, or one line further off y = 0.

    openEMS's magnetic wall zeroes the tangential H on the first dual line, and an H probe on
    the first mesh line above the wall (where the samples on the wall are taken) records no
    H at all (every E-plane and axis sample of the first runs had H = 0).  Its H probe is
    moved to the next line (4.1 mm further off the wall on the horns' meshes): in the
    wall's plane only the normal H_y survives, even about y = 0, so it changes there only
    to second order.
    """
    if case["symmetric"] and np.isclose(q[1], lines[1][1]):
        return np.array([q[0], lines[1][2], q[2]])
    return q


# ---------------------------------------------------------------------------------------
# simulation
# ---------------------------------------------------------------------------------------
def simulate(case: dict, mesh_name: str, workdir: Path, reuse: bool = False) -> dict:
    """Build, run and reduce one case on one mesh; return the reduced results."""
    n = MESHES[mesh_name]
    lines, mesh_info = build_mesh(case, n)
    sim_path = str((workdir / f"{case['name']}_{mesh_name}").resolve())
    FDTD = openEMS(NrTS=MAX_STEPS, EndCriteria=END_CRITERION)
    FDTD.SetGaussExcite(F0, case["fc"])
    if case["symmetric"]:
        bc = ["PML_8", "PML_8", "PMC", "PML_8", "PEC", "PML_8"]
    else:
        bc = ["PML_8"] * 6
    FDTD.SetBoundaryCond(bc)
    CSX = ContinuousStructure()
    FDTD.SetCSX(CSX)
    grid = CSX.GetGrid()
    grid.SetDeltaUnit(1.0)
    for ax, d in enumerate("xyz"):
        grid.SetLines(d, lines[ax])
    feed = add_geometry(case, CSX, FDTD, lines)
    # nf2ff box: two cells inside the PML
    start = [lines[ax][PML_CELLS + 2] for ax in range(3)]
    stop = [lines[ax][-PML_CELLS - 3] for ax in range(3)]
    if case["symmetric"]:
        # dumps start on the first line above y = 0 (a quarter cell snaps to it), z = 0
        start[1] = symmetry_half_cell(case) / 2
        start[2] = 0.0
    nf = FDTD.CreateNF2FFBox("nf2ff", start, stop, frequency=[F0])
    if case["symmetric"]:
        nf.start = np.array(nf.start, dtype=float)
        nf.start[1] = 0.0  # the mirror plane of the transform is the magnetic wall y = 0
    # the same closed surface, node-interpolated, for the Poynting flux
    for face in FACES:
        ax, side = face
        if case["symmetric"] and ax > 0 and side == 0:
            continue  # a symmetry plane carries no flux
        lo, hi = list(start), list(stop)
        if side == 0:
            hi[ax] = lo[ax]
        else:
            lo[ax] = hi[ax]
        for kind, dt in (("E", 10), ("H", 11)):
            d = CSX.AddDump(
                f"flux_{kind}_{ax}{side}", dump_type=dt, dump_mode=1, file_type=1, frequency=[F0]
            )
            d.AddBox(lo, hi)
    pts = snap_points(case, lines, nominal_points(case))
    for i, p in enumerate(pts):
        for kind, pt in (("E", 2), ("H", 3)):
            pr = CSX.AddProbe(f"pt{kind}_{i:03d}", p_type=pt)
            q = h_probe_position(case, lines, p["position"]) if kind == "H" else p["position"]
            pr.AddBox(q, q)
    t0 = time.time()
    if reuse and os.path.exists(sim_path + ".log"):
        log = Path(sim_path + ".log").read_text(errors="replace")  # post-process only
        run_s = float(re.findall(r"\n(\d+\.?\d*) s run", log + "\n0 s run")[0])
    else:
        log = run_logged(FDTD, sim_path)
        run_s = time.time() - t0
        with open(sim_path + ".log", "a") as fh:
            fh.write(f"\n{run_s:.1f} s run\n")
    if case["symmetric"]:
        for fn in os.listdir(sim_path):
            if fn.endswith(".h5") and fn != "nf2ff.h5":
                repair_symmetry_rows(os.path.join(sim_path, fn))
    steps = int(re.findall(r"Time for (\d+) iterations", log)[-1])
    res = postprocess(case, sim_path, feed, nf, pts, lines, start, stop)
    res.update(
        mesh=mesh_info,
        run_time_s=round(run_s, 1),
        timesteps=steps,
        end_criterion=f"field energy decayed by {END_CRITERION:g} "
        f"({10 * np.log10(END_CRITERION):.0f} dB) from its peak, at most {MAX_STEPS} "
        "steps",
        excitation=f"Gaussian pulse, centre {F0:g} Hz, cut-off {case['fc']:g} Hz",
    )
    return res


def run_logged(FDTD, sim_path: str) -> str:  # noqa: ANN001
    """Run openEMS with its console output copied to ``<sim_path>.log``; return the text."""
    logname = sim_path + ".log"
    sys.stdout.flush()
    saved = os.dup(1)
    cwd = os.getcwd()
    with open(logname, "w") as fh:
        os.dup2(fh.fileno(), 1)
        try:
            FDTD.Run(sim_path, cleanup=True, verbose=0, numThreads=THREADS)
        finally:
            sys.stdout.flush()
            os.dup2(saved, 1)
            os.close(saved)
            # Run leaves the process in sim_path, which is removed after the run: a
            # second run (the other mesh) would then fail on the missing working folder
            os.chdir(cwd)
    return Path(logname).read_text(errors="replace")


def repair_symmetry_rows(fn: str) -> None:
    """Restore the row of a node-interpolated dump that lies on a symmetry plane.

    openEMS's node interpolation may return zero on the first mesh line of the domain, which
    is wrong for the components that are even about the electric wall z = 0. The
    row is replaced by the even continuation of the next two rows, f(0) = f1 - (f2 - f1)
    y1^2 / (y2^2 - y1^2), where a component was returned as zero; a component that is odd
    about the plane is small there and stays small. The file is rewritten in place, before
    the near-field to far-field transform reads it.
    """
    with h5py.File(fn, "r+") as f:
        mesh = [np.array(f["Mesh"][k]) for k in ("x", "y", "z")]
        fd = f["FieldData"]["FD"]
        for key in list(fd.keys()):
            arr = np.array(fd[key])  # (component, z, y, x)
            changed = False
            for ax, dim in ((2, 1),):  # the electric wall z = 0 (array dim 1)
                c = mesh[ax]
                if c.size < 3 or abs(c[0]) > 1e-9:
                    continue
                y1, y2 = c[1], c[2]
                r0 = np.take(arr, 0, axis=dim)
                r1 = np.take(arr, 1, axis=dim)
                r2 = np.take(arr, 2, axis=dim)
                ext = r1 - (r2 - r1) * y1**2 / (y2**2 - y1**2)
                for comp in range(3):
                    if np.max(np.abs(r0[comp])) <= 1e-6 * max(np.max(np.abs(r1[comp])), 1e-300):
                        idx = [slice(None)] * 4
                        idx[0] = comp
                        idx[dim] = 0
                        arr[tuple(idx)] = ext[comp]
                        changed = True
            if changed:
                fd[key][...] = arr


def read_probe(sim_path: str, name: str) -> np.ndarray:
    """Peak phasor (3 components) at 2.45 GHz of a time-domain field probe."""
    d = np.loadtxt(os.path.join(sim_path, name), comments="%")
    return np.array([DFT_time2freq(d[:, 0], d[:, k], [F0])[0] for k in (1, 2, 3)])


def read_fd(fn: str) -> tuple[list[np.ndarray], np.ndarray]:
    """Mesh and the complex field (shape (nx, ny, nz, 3)) of a frequency-domain dump."""
    with h5py.File(fn, "r") as f:
        mesh = [np.array(f["Mesh"][k]) for k in ("x", "y", "z")]
        fd = f["FieldData"]["FD"]
        key = sorted(k for k in fd.keys() if k.endswith("_real"))[0]
        re = np.array(fd[key])
        im = np.array(fd[key.replace("_real", "_imag")])
    field = re + 1j * im
    # stored as (component, z, y, x) by openEMS; bring it to (x, y, z, component)
    if field.shape[0] == 3:
        field = np.transpose(field, (3, 2, 1, 0))
    return mesh, field


def plane_flux(
    fn_e: str,
    fn_h: str,
    normal_axis: int,
    sign: float,
    symmetric: bool = False,
    wall_top: bool = False,
) -> float:
    """Integrate 0.5 Re(E x H*) . n over a node-interpolated dumped plane [W].

    Peak phasors; trapezoidal rule over the mesh lines. With ``wall_top`` (a guide's
    cross-section ending on its broad wall z = b/2), the row on the wall is replaced by the
    linear continuation of the two rows below it: openEMS's node interpolation averages E and H
    there with the zero field inside the metal, which halves both, while the TE10 field is
    uniform along z up to the wall.
    """
    mesh, e = read_fd(fn_e)
    _, h = read_fd(fn_h)
    s = 0.5 * np.real(np.cross(e, np.conj(h)))[..., normal_axis] * sign
    s = np.take(s, 0, axis=normal_axis)
    others = [ax for ax in range(3) if ax != normal_axis]
    mesh = list(mesh)
    if wall_top and 2 in others and mesh[2].size >= 3:
        k = others.index(2)
        z = mesh[2]
        r1, r2 = np.take(s, -2, axis=k), np.take(s, -3, axis=k)
        top = r1 + (r1 - r2) * (z[-1] - z[-2]) / (z[-2] - z[-3])
        idx = [slice(None)] * 2
        idx[k] = -1
        s = s.copy()
        s[tuple(idx)] = top
    if 1 in others and symmetric and mesh[1][0] > 0:
        # from the magnetic wall y = 0 to the first dumped line: the even continuation
        k = others.index(1)
        s = np.concatenate([np.take(s, [0], axis=k), s], axis=k)
        mesh[1] = np.concatenate([[0.0], mesh[1]])
    s = trapezoid(s, mesh[others[1]], axis=1)
    return float(trapezoid(s, mesh[others[0]], axis=0))


def trapezoid(f: np.ndarray, x: np.ndarray, axis: int) -> np.ndarray:
    """Trapezoidal rule along one axis (numpy 1.24 and 2.x alike)."""
    f = np.moveaxis(f, axis, 0)
    if f.shape[0] < 2:
        return f[0] * 0.0
    dx = np.diff(x).reshape((-1,) + (1,) * (f.ndim - 1))
    return np.sum(0.5 * (f[1:] + f[:-1]) * dx, axis=0)


def postprocess(case, sim_path, feed, nf, pts, lines, start, stop) -> dict:  # noqa: ANN001
    """Powers, |S11|, far field and the near-field samples of a finished run."""
    sym = 4.0 if case["symmetric"] else 1.0
    # closed-surface Poynting flux through the nf2ff box
    flux = 0.0
    for ax, side in FACES:
        fe = os.path.join(sim_path, f"flux_E_{ax}{side}.h5")
        if os.path.exists(fe):
            flux += plane_flux(
                fe, fe.replace("flux_E", "flux_H"), ax, 1.0 if side else -1.0, case["symmetric"]
            )
    p_box = sym * flux
    out: dict = {"power": {}}
    if case["kind"] in ("guide", "horn"):
        p_port = sym * plane_flux(
            os.path.join(sim_path, "port_E.h5"),
            os.path.join(sim_path, "port_H.h5"),
            0,
            1.0,
            case["symmetric"],
            wall_top=True,
        )
        s11 = fit_s11(case, sim_path, feed)
        out["power"]["port_definition"] = (
            "net TE10 power through the guide cross-section at x = "
            f"{feed['port_plane_m']:.4f} m, between the feed sheet and the "
            + ("aperture" if case["kind"] == "guide" else "throat")
            + " (Poynting flux of the frequency-domain dump)"
        )
        out["s11"] = s11
    else:
        port = feed["port"]
        port.CalcPort(sim_path, [F0])
        p_port = float(port.P_acc[0])
        g = port.uf_ref[0] / port.uf_inc[0]
        zin = port.uf_tot[0] / port.if_tot[0]
        out["power"]["port_definition"] = "power accepted by the 50 ohm lumped port, 0.5 Re(U I*)"
        out["s11"] = {
            "magnitude": float(abs(g)),
            "db": float(20 * np.log10(abs(g))),
            "reference_ohm": 50.0,
            "plane": "the lumped port at the probe's base",
            "input_impedance_ohm": [float(zin.real), float(zin.imag)],
        }
    # far field
    theta = np.arange(0.0, 180.1, 5.0)
    phi = np.arange(0.0, 360.0, 5.0)
    ff = nf.CalcNF2FF(sim_path, [F0], theta, phi, radius=1.0, center=[0, 0, 0])
    p_nf = float(ff.Prad[0])
    dens = np.asarray(ff.P_rad[0])  # (theta, phi) [W/m^2 at r = 1 m]
    D = 4 * np.pi * dens / p_nf
    dmax = float(np.max(D))
    it, ip = np.unravel_index(np.argmax(D), D.shape)
    cuts = {}
    for plane in ("E", "H"):
        vals = []
        for psi in np.radians(np.arange(0, 360, 5)):
            d = (
                np.array([np.cos(psi), 0.0, np.sin(psi)])
                if plane == "E"
                else np.array([np.cos(psi), np.sin(psi), 0.0])
            )
            th = np.degrees(np.arccos(np.clip(d[2], -1, 1)))
            ph = np.degrees(np.arctan2(d[1], d[0])) % 360.0
            i = int(np.argmin(np.abs(theta - th)))
            j = int(np.argmin(np.abs(((phi - ph) + 180.0) % 360.0 - 180.0)))
            vals.append(round(float(10 * np.log10(max(D[i, j], 1e-30))), 3))
        cuts[plane] = vals
    out["power"].update(
        port_w=p_port,
        closed_surface_flux_w=p_box,
        nf2ff_w=p_nf,
        flux_over_port=p_box / p_port,
        nf2ff_over_flux=p_nf / p_box,
        closed_surface=(
            "faces of the nf2ff box "
            + str([round(v, 4) for v in start])
            + " to "
            + str([round(v, 4) for v in stop])
            + " m"
            + (" and their mirror images (4 x the quarter)" if case["symmetric"] else "")
        ),
    )
    out["directivity"] = {
        "peak_dbi": round(10 * np.log10(dmax), 3),
        "peak_direction_theta_phi_deg": [float(theta[it]), float(phi[ip])],
        "boresight_dbi": round(float(10 * np.log10(D[int(np.argmin(np.abs(theta - 90))), 0])), 3),
        "cut_angles_deg": list(range(0, 360, 5)),
        "cut_definition": (
            "angle psi from boresight +x: E plane towards +z (direction cos psi x + sin psi z), "
            "H plane towards +y (cos psi x + sin psi y)"
        ),
        "e_plane_dbi": cuts["E"],
        "h_plane_dbi": cuts["H"],
    }
    # near-field samples, RMS per radiated watt
    samples = []
    for i, p in enumerate(pts):
        e = read_probe(sim_path, f"ptE_{i:03d}")
        h = read_probe(sim_path, f"ptH_{i:03d}")
        e_rms = float(np.sqrt(np.sum(np.abs(e) ** 2) / 2 / p_box))
        h_rms = float(np.sqrt(np.sum(np.abs(h) ** 2) / 2 / p_box))
        samples.append(
            {
                "plane": p["plane"],
                "angle_deg": p["angle_deg"],
                "distance_m": p["distance_m"],
                "position_m": [round(float(v), 6) for v in p["position"]],
                "h_position_m": [
                    round(float(v), 6) for v in h_probe_position(case, lines, p["position"])
                ],
                "e_v_m": e_rms,
                "h_a_m": h_rms,
                "power_density_w_m2": max(e_rms**2 / ETA0, ETA0 * h_rms**2),
            }
        )
    out["samples"] = samples
    return out


def fit_s11(case: dict, sim_path: str, feed: dict) -> dict:
    """TE10 reflection at the aperture (or throat) from Ez along the guide's axis.

    A forward and a backward TE10 wave are fitted by least squares; the propagation constant
    is fitted too (the mesh's dispersion).
    """
    xs = np.array([x for _, x in feed["axis_probes"]])
    ez = np.array([read_probe(sim_path, nm)[2] for nm, _ in feed["axis_probes"]])
    best = None
    for beta in case["beta"] * np.linspace(0.85, 1.15, 601):
        M = np.stack([np.exp(-1j * beta * xs), np.exp(1j * beta * xs)], axis=1)
        coef, *_ = np.linalg.lstsq(M, ez, rcond=None)
        r = np.linalg.norm(M @ coef - ez) / np.linalg.norm(ez)
        if best is None or r < best[0]:
            best = (r, beta, coef)
    r, beta, (fwd, bwd) = best
    x0 = feed["s11_plane_m"]
    g = (bwd * np.exp(1j * beta * x0)) / (fwd * np.exp(-1j * beta * x0))
    return {
        "magnitude": float(abs(g)),
        "db": float(20 * np.log10(abs(g))),
        "phase_deg": float(np.degrees(np.angle(g))),
        "plane": f"TE10 reflection referred to x = {x0} m",
        "fitted_beta_over_analytic": float(beta / case["beta"]),
        "fit_residual": float(r),
        "axis_points": int(len(xs)),
    }


# ---------------------------------------------------------------------------------------
# data files
# ---------------------------------------------------------------------------------------
def toml_table(source: dict) -> str:
    """The ``[[source]]`` table of a case, as TOML text."""

    def fmt(v):  # noqa: ANN001, ANN202
        if isinstance(v, str):
            return json.dumps(v)
        if isinstance(v, list | tuple):
            return "[" + ", ".join(fmt(x) for x in v) + "]"
        return repr(float(v))

    rows = ["[[source]]"] + [f"{k} = {fmt(v)}" for k, v in source.items()]
    return "\n".join(rows) + "\n"


def openems_version() -> str:
    """The solver's name, version and Debian package version."""
    try:
        out = subprocess.run(
            ["dpkg-query", "-W", "-f=${Version}", "openems"],
            capture_output=True,
            text=True,
            check=False,
        ).stdout.strip()
    except OSError:
        out = ""
    return f"openEMS v0.0.35 (Debian package openems {out})" if out else "openEMS v0.0.35"


def write_case(case: dict, runs: dict) -> Path:
    """Write ``validation/data/<case>.json`` from the two convergence meshes' results."""
    ref = runs[CONVERGENCE[1]]
    other = runs[CONVERGENCE[0]]
    by_pos = {}
    for s in other["samples"]:
        by_pos[(s["plane"], s["angle_deg"], s["distance_m"])] = s
    diffs = []
    for s in ref["samples"]:
        o = by_pos.get((s["plane"], s["angle_deg"], s["distance_m"]))
        if o is not None:
            diffs.append(abs(10 * np.log10(s["power_density_w_m2"] / o["power_density_w_m2"])))
    doc = {
        "case": case["name"],
        "description": case["description"],
        "engine": openems_version(),
        "generated_by": "/usr/bin/python3 validation/run.py --case " + case["name"],
        "frequency_hz": F0,
        "conventions": {
            "frame": "keepclear scenario frame: the source's reference point at the origin, "
            "boresight (aperture normal or probe axis) +x, aperture E field / face "
            "height +z, broad wall / face width +y; metres",
            "fields": "RMS |E| [V/m] and |H| [A/m] for 1 W radiated (closed-surface Poynting "
            "flux); power_density_w_m2 = max(|E|^2/eta0, eta0 |H|^2)",
            "time": "openEMS phasors, exp(+j w t) time convention, peak amplitudes before the "
            "RMS conversion (|E_rms|^2 = |E_peak|^2 / 2)",
            "samples": "positions are the FDTD mesh nodes nearest the nominal points (plane, "
            "angle from boresight towards +z in the E plane and +y in the H plane, "
            "distance from the origin)",
        },
        "scenario_source_toml": toml_table(case["source"]),
        "mesh": ref["mesh"],
        "timesteps": ref["timesteps"],
        "end_criterion": ref["end_criterion"],
        "excitation": ref["excitation"],
        "run_time_s": ref["run_time_s"],
        "power": ref["power"],
        "s11": ref["s11"],
        "directivity": ref["directivity"],
        "samples": ref["samples"],
        "convergence": {
            "meshes": {
                m: {
                    "mesh": runs[m]["mesh"],
                    "timesteps": runs[m]["timesteps"],
                    "run_time_s": runs[m]["run_time_s"],
                    "peak_directivity_dbi": runs[m]["directivity"]["peak_dbi"],
                    "power": runs[m]["power"],
                    "s11": runs[m]["s11"],
                }
                for m in CONVERGENCE
            },
            "max_sample_difference_db": round(float(max(diffs)), 3) if diffs else None,
            "median_sample_difference_db": round(float(np.median(diffs)), 3) if diffs else None,
            "peak_directivity_difference_db": round(
                abs(ref["directivity"]["peak_dbi"] - other["directivity"]["peak_dbi"]), 3
            ),
            "samples_compared": len(diffs),
            "other_mesh_samples": other["samples"],
        },
    }
    DATA.mkdir(parents=True, exist_ok=True)
    fn = DATA / f"{case['name']}.json"
    fn.write_text(json.dumps(doc, indent=1) + "\n")
    return fn


def main(argv: list[str] | None = None) -> int:
    """Command line: run the cases asked for and write their data files."""
    global END_CRITERION
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--case", default="all", help="case name or 'all': " + ", ".join(CASES))
    ap.add_argument(
        "--mesh",
        default="both",
        choices=["both", *MESHES],
        help="'both' runs the two convergence meshes and writes the data file",
    )
    ap.add_argument(
        "--workdir",
        default=os.environ.get("TMPDIR", "/tmp") + "/keepclear-fdtd",
        help="scratch folder for openEMS's raw output (large; not kept)",
    )
    ap.add_argument("--keep", action="store_true", help="keep the raw openEMS output")
    ap.add_argument(
        "--reuse",
        action="store_true",
        help="post-process a kept raw output again instead of running openEMS",
    )
    ap.add_argument(
        "--end-criterion",
        type=float,
        default=END_CRITERION,
        help=f"energy decay that ends a run (default {END_CRITERION:g})",
    )
    ap.add_argument(
        "--summary",
        action="store_true",
        help="print the results table of the stored data files (markdown) and exit",
    )
    args = ap.parse_args(argv)
    END_CRITERION = args.end_criterion
    if args.summary:
        print_summary()
        return 0
    names = list(CASES) if args.case == "all" else [args.case]
    work = Path(args.workdir)
    work.mkdir(parents=True, exist_ok=True)
    for name in names:
        if name not in CASES:
            print(
                f"run.py: --case: unknown case {name!r}; one of {', '.join(CASES)}", file=sys.stderr
            )
            return 2
        case = CASES[name]()
        meshes = CONVERGENCE if args.mesh == "both" else (args.mesh,)
        runs = {}
        for m in meshes:
            cache = work / f"{name}_{m}.json"
            if cache.exists() and args.mesh == "both":
                runs[m] = json.loads(cache.read_text())
                print(f"{name} {m}: reusing {cache}", flush=True)
                continue
            print(f"{name} {m}: running", flush=True)
            res = simulate(case, m, work, reuse=args.reuse)
            runs[m] = res
            cache.write_text(json.dumps(res, indent=1))
            summary(name, m, res)
            if not args.keep:
                shutil.rmtree(work / f"{name}_{m}", ignore_errors=True)
        if args.mesh == "both":
            print("wrote", write_case(case, runs), flush=True)
    return 0


def _axis(dbi: float) -> str:
    return f"{dbi:.2f}" if dbi > -60 else "null"


def print_summary() -> None:
    """Markdown table of the stored cases (for the README)."""
    print(
        "| case | cells (fine) | max / min cell [mm] | steps | run [s] | P_flux / P_port | "
        "P_nf2ff / P_flux | abs S11 | D peak [dBi] | D +x [dBi] | mesh change: D peak / "
        "samples max (median) [dB] |"
    )
    print("|" + " --- |" * 11)
    for fn in sorted(DATA.glob("*.json")):
        d = json.loads(fn.read_text())
        m, p, c = d["mesh"], d["power"], d["convergence"]
        runs = sum(v["run_time_s"] for v in c["meshes"].values())
        print(
            f"| {d['case']} | {m['cells']:,} | {m['max_cell_m'] * 1e3:.1f} / "
            f"{m['smallest_cell_m'] * 1e3:.2f} | {d['timesteps']} | {runs:.0f} | "
            f"{p['flux_over_port']:.3f} | {p['nf2ff_over_flux']:.3f} | "
            f"{d['s11']['magnitude']:.3f} | {d['directivity']['peak_dbi']:.2f} | "
            f"{_axis(d['directivity']['boresight_dbi'])} | "
            f"{c['peak_directivity_difference_db']:.2f} / {c['max_sample_difference_db']:.2f} "
            f"({c['median_sample_difference_db']:.2f}) |"
        )


def summary(name: str, mesh: str, res: dict) -> None:
    """One line per finished run on the console."""
    p = res["power"]
    print(
        f"{name} {mesh}: cells {res['mesh']['cells']}, steps {res['timesteps']}, "
        f"{res['run_time_s']} s; P_port {p['port_w']:.4g} W, "
        f"flux {p['closed_surface_flux_w']:.4g} W (ratio {p['flux_over_port']:.4f}), "
        f"nf2ff/flux {p['nf2ff_over_flux']:.4f}; "
        f"|S11| {res['s11']['magnitude']:.3f}; Dmax {res['directivity']['peak_dbi']} dBi, "
        f"boresight {res['directivity']['boresight_dbi']} dBi",
        flush=True,
    )


if __name__ == "__main__":
    sys.exit(main())
