"""Forward model of a growing laminated column: lamina records, meshes and truth files.

- :class:`SynthParams` - every parameter, validated.
- :func:`simulate_laminae` - the lamina record only (fast; no mesh).
- :func:`simulate` - a full specimen (mesh in file units and frame, colours, truth dict).
- :func:`write_specimen` - the mesh (PLY/OBJ/STL) and ``<stem>.truth.json`` beside it.
"""
from .params import SynthParams
from .laminae import LaminaRecord, simulate_laminae

__all__ = ["SynthParams", "LaminaRecord", "simulate_laminae"]
