"""Forward model of a growing laminated column: lamina records, meshes and truth files.

- :class:`SynthParams` - every parameter, validated.
- :func:`simulate_laminae` - the lamina record only (fast; no mesh).
- :func:`simulate` - a full specimen (mesh in file units and frame, colours, truth dict).
- :func:`write_specimen` - the mesh (PLY/OBJ/STL) and ``<stem>.truth.json`` beside it.
- :func:`make_mesh` - ``(vertices, faces, truth)`` in one call, for checks.

Mesh kinds (``SynthParams.mesh_kind``): ``photogrammetric`` (default; near-isotropic triangles not
aligned with the laminae), ``ct`` (voxels and marching cubes) and ``rings`` (the ring-aligned mesh).
"""
from .params import SynthParams
from .laminae import LaminaRecord, simulate_laminae


def __getattr__(name):
    # simulate/write_specimen pull in scipy.spatial; import them on first use only.
    if name in ("simulate", "SynthSpecimen", "make_mesh"):
        from . import specimen
        return getattr(specimen, name)
    if name in ("write_specimen", "truth_path"):
        from . import writer
        return getattr(writer, name)
    raise AttributeError(f"module 'bandgeo.synth' has no attribute {name!r}")


__all__ = ["SynthParams", "LaminaRecord", "simulate_laminae", "simulate", "SynthSpecimen",
           "write_specimen", "truth_path", "make_mesh"]
