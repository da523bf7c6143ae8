"""Test meshes for the scan tests (domed columns in known poses), and checks of the meshes themselves.

The columns are surfaces of revolution made with trimesh.creation.revolve: a side wall of radius R and
height H, a spherical dome of rise ``dome`` on top, and a flat saw-cut base (or an open end).
"""
import numpy as np
import pytest
from scipy.spatial.transform import Rotation

import trimesh  # a hard dependency (pyproject.toml): imported, never skipped


def domed_column(radius=10.0, height=60.0, dome=4.0, base="cut", sections=64, rings=40, grooves=0.0,
                 dome_rings=14):
    """(vertices (n,3), faces (m,3)) of an upright column: z up, base at z = 0, axis on z, in mm."""
    rho = (radius ** 2 + dome ** 2) / (2 * dome)
    start = np.arcsin(radius / rho)
    a = np.linspace(start, 0.0, dome_rings)
    top = np.stack([rho * np.sin(a), height - rho * np.cos(start) + rho * np.cos(a)], axis=1)
    z = np.linspace(0.0, height, rings)[1:]
    r = radius - grooves * np.cos(np.pi * z / 2.0) ** 8
    wall = np.stack([r, z], axis=1)
    pieces = [[[radius, 0.0]], wall, top[1:]]
    if base == "cut":
        pieces.insert(0, [[0.0, 0.0], [radius / 2, 0.0]])
    profile = np.vstack(pieces)
    mesh = trimesh.creation.revolve(profile, sections=sections)
    return np.asarray(mesh.vertices, float), np.asarray(mesh.faces, np.int64)


def random_pose(seed):
    """A random rotation (3,3) and shift (3,) (scipy's uniform random rotation)."""
    rng = np.random.default_rng(seed)
    return Rotation.random(random_state=rng).as_matrix(), rng.uniform(-200, 200, 3)


def posed_column(seed, scale=1.0, **kw):
    """A domed column in a random pose; returns (vertices, faces, up_in_file_frame)."""
    v, f = domed_column(**kw)
    rot, shift = random_pose(seed)
    return (v @ rot.T + shift) * scale, f, rot @ np.array([0.0, 0.0, 1.0])


def write_ply(path, vertices, faces, colors=None):
    """Write a mesh with trimesh (binary PLY)."""
    mesh = trimesh.Trimesh(vertices, faces, vertex_colors=colors, process=False)
    mesh.export(str(path))
    return path


def test_domed_column_is_closed_and_outward():
    # trimesh is the reference: a closed, consistently wound surface with positive volume
    v, f = domed_column()
    mesh = trimesh.Trimesh(v, f, process=True)
    assert mesh.is_watertight and mesh.is_winding_consistent
    # volume of cylinder + spherical cap, pi h^2 (3 rho - h) / 3 (analytic; common practice)
    rho = (10.0 ** 2 + 4.0 ** 2) / 8.0
    expected = np.pi * 10.0 ** 2 * 60.0 + np.pi * 4.0 ** 2 * (3 * rho - 4.0) / 3.0
    assert mesh.volume == pytest.approx(expected, rel=0.02)


def test_open_column_has_one_rim():
    v, f = domed_column(base="open")
    mesh = trimesh.Trimesh(v, f, process=True)
    assert not mesh.is_watertight
    assert len(mesh.outline().entities) == 1
