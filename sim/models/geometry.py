"""Spacecraft geometry and attitude modes, numpy only (no JVM).

Attitude modes are rotations of the body axes from the VNC local orbital frame (X along the
inertial velocity, Y along the orbit normal, Z = X x Y). ``rotation_xyz_deg = (a1, a2, a3)``
means: rotate the VNC axes by ``a1`` about X, then by ``a2`` about the *new* Y, then by ``a3``
about the *new* Z (intrinsic Cardan XYZ), which is the convention of Orekit's
``LofOffset(frame, LOFType.VNC, RotationOrder.XYZ, a1, a2, a3)``; a test checks the two agree.

Drag area: the truth applies drag isotropically with the *ram-facing* area of the mode in effect,
i.e. the geometry projected on the plane normal to the velocity direction in that mode's attitude.
For a ``"box"`` geometry that area is ``|d_x| A_yz + |d_y| A_xz + |d_z| A_xy`` for the box
(``d`` the unit velocity direction in body axes) plus ``A |n . d|`` for each double-sided panel
and ``A max(0, n . d)`` for each single-sided one (panel normal ``n``). Shadowing of one part by
another is not modelled. For a ``"table"`` geometry the area is read from the table.
"""

from __future__ import annotations

from typing import Mapping

import numpy as np
from scipy.spatial.transform import Rotation

from sim.errors import ScenarioError
from sim.scenario.config import BusConfig, GeometryConfig

__all__ = ["rotation_vnc_to_body", "error_rotation", "velocity_direction_body", "projected_area_m2",
           "mode_area_m2", "mean_projected_area_m2", "mode_names", "mode_areas_m2", "srp_area_m2"]


def rotation_vnc_to_body(rotation_xyz_deg) -> np.ndarray:
    """Matrix whose columns are the body axes expressed in VNC.

    Parameters
    ----------
    rotation_xyz_deg : array_like, shape (3,)
        Intrinsic Cardan XYZ angles, degrees.

    Returns
    -------
    np.ndarray, shape (3, 3)
        ``M`` with ``v_vnc = M @ v_body`` (and ``v_body = M.T @ v_vnc``).
    """
    a1, a2, a3 = np.radians(np.asarray(rotation_xyz_deg, dtype=float))
    c1, s1, c2, s2, c3, s3 = np.cos(a1), np.sin(a1), np.cos(a2), np.sin(a2), np.cos(a3), np.sin(a3)
    rx = np.array([[1.0, 0.0, 0.0], [0.0, c1, -s1], [0.0, s1, c1]])
    ry = np.array([[c2, 0.0, s2], [0.0, 1.0, 0.0], [-s2, 0.0, c2]])
    rz = np.array([[c3, -s3, 0.0], [s3, c3, 0.0], [0.0, 0.0, 1.0]])
    return rx @ ry @ rz


def error_rotation(error_rotvec_rad) -> np.ndarray:
    """The (3, 3) matrix of an attitude error given as a rotation vector (axis times angle, rad,
    about the VNC axes), by ``scipy.spatial.transform.Rotation.from_rotvec``."""
    return Rotation.from_rotvec(np.asarray(error_rotvec_rad, dtype=float)).as_matrix()


def velocity_direction_body(rotation_xyz_deg, error_rotvec_rad=None) -> np.ndarray:
    """Unit velocity direction (VNC +X) in body axes for a mode's rotation, shape (3,).

    ``error_rotvec_rad`` (3,), optional: an attitude pointing error applied after the mode
    rotation (body axes in VNC become ``R(error) M``).
    """
    m = rotation_vnc_to_body(rotation_xyz_deg)
    if error_rotvec_rad is not None and np.any(np.asarray(error_rotvec_rad, dtype=float) != 0.0):
        m = error_rotation(error_rotvec_rad) @ m
    return m.T @ np.array([1.0, 0.0, 0.0])


def projected_area_m2(geometry: GeometryConfig, direction_body) -> float:
    """Area of a ``"box"`` geometry seen along a body-frame direction, m^2.

    Parameters
    ----------
    geometry : GeometryConfig
        ``kind = "box"``.
    direction_body : array_like, shape (3,)
        Flow direction (unit vector towards the ram, body axes).
    """
    d = np.asarray(direction_body, dtype=float)
    d = d / np.linalg.norm(d)
    x, y, z = geometry.box_x_m, geometry.box_y_m, geometry.box_z_m
    area = abs(d[0]) * y * z + abs(d[1]) * x * z + abs(d[2]) * x * y
    for p in geometry.panels:
        n = np.asarray(p.normal_body, dtype=float)
        n = n / np.linalg.norm(n)
        c = float(n @ d)
        area += p.area_m2 * (abs(c) if p.double_sided else max(0.0, c))
    return float(area)


def mode_area_m2(geometry: GeometryConfig, rotation_xyz_deg, error_rotvec_rad=None) -> float:
    """Ram-facing area of a ``"box"`` geometry in an attitude mode, with an optional attitude
    error (rotation vector about the VNC axes, rad), m^2."""
    if geometry.kind != "box":
        raise ValueError(f"mode_area_m2 needs a box geometry, got kind = {geometry.kind!r}")
    return projected_area_m2(geometry, velocity_direction_body(rotation_xyz_deg, error_rotvec_rad))


def mean_projected_area_m2(geometry: GeometryConfig) -> float:
    """Orientation-averaged projected area, m^2 (Cauchy's formula: a convex body's mean shadow
    is a quarter of its surface; a flat plate's is half its one-sided area).

    Used as the isotropic SRP area of a box geometry when ``srp_area_m2`` is not given.
    """
    x, y, z = geometry.box_x_m, geometry.box_y_m, geometry.box_z_m
    area = 2.0 * (x * y + y * z + x * z) / 4.0
    for p in geometry.panels:
        area += p.area_m2 * (0.5 if p.double_sided else 0.25)
    return float(area)


def mode_names(bus: BusConfig) -> tuple[str, ...]:
    """Attitude-mode names of a bus in index order (the order of ``bus.modes``; for a table
    geometry without ``modes``, the order of ``area_by_mode_m2``)."""
    if bus.modes:
        return tuple(bus.modes.keys())
    if bus.geometry.kind == "table":
        return tuple(bus.geometry.area_by_mode_m2.keys())
    return ("nominal",)


def mode_areas_m2(bus: BusConfig) -> dict[str, float]:
    """Nominal ram-facing drag area of each attitude mode, m^2.

    Raises
    ------
    ScenarioError
        Unknown geometry kind, a table without an area for a mode, or a non-positive area.
    """
    g = bus.geometry
    names = mode_names(bus)
    out: dict[str, float] = {}
    if g.kind == "box":
        for name in names:
            rot = bus.modes[name].rotation_xyz_deg if name in bus.modes else (0.0, 0.0, 0.0)
            out[name] = projected_area_m2(g, velocity_direction_body(rot))
    elif g.kind == "table":
        for name in names:
            if name not in g.area_by_mode_m2:
                raise ScenarioError(f"buses.{bus.name}.geometry.area_by_mode_m2", dict(g.area_by_mode_m2),
                                    f"an area in m^2 for every attitude mode; {name!r} is missing")
            out[name] = float(g.area_by_mode_m2[name])
    else:
        raise ScenarioError(f"buses.{bus.name}.geometry.kind", g.kind, "'box' or 'table'")
    for name, a in out.items():
        if not np.isfinite(a) or a < 0.0:
            raise ScenarioError(f"buses.{bus.name}.geometry", a,
                                f"a non-negative finite drag area for mode {name!r}, m^2")
    if max(out.values()) <= 0.0:
        raise ScenarioError(f"buses.{bus.name}.geometry", out, "at least one mode with a positive area, m^2")
    return out


def srp_area_m2(bus: BusConfig, areas: Mapping[str, float] | None = None) -> float:
    """Isotropic SRP area, m^2: ``geometry.srp_area_m2`` when given; otherwise the nominal-mode
    drag area for a table geometry and the orientation-averaged area for a box."""
    g = bus.geometry
    if g.srp_area_m2 is not None:
        return float(g.srp_area_m2)
    if g.kind == "table":
        areas = dict(areas) if areas is not None else mode_areas_m2(bus)
        key = "nominal" if "nominal" in areas else next(iter(areas))
        return float(areas[key])
    return mean_projected_area_m2(g)
