"""Reading a STEP file (ISO 10303-21) into a B-rep: its shape, its faces in file order and their names.

The kernel's STEPControl_Reader parses the file and transfers every root; the name of each face is the
name of the STEP entity it came from (ADVANCED_FACE('name', ...)), or ``face-N`` (1-based, file order)
when that name is empty or repeated.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from OCP.IFSelect import IFSelect_RetDone
from OCP.STEPControl import STEPControl_Reader
from OCP.TopAbs import TopAbs_FACE
from OCP.TopExp import TopExp_Explorer
from OCP.TopoDS import TopoDS, TopoDS_Face, TopoDS_Shape

from surfcheck.cad.kernel import silenced
from surfcheck.errors import InputError


@dataclass(frozen=True, eq=False)
class Brep:
    """A boundary representation read from a file: the kernel's shape, its faces (each once, in
    the order the kernel explores them) and one name per face."""

    shape: TopoDS_Shape
    faces: tuple[TopoDS_Face, ...]
    names: tuple[str, ...]
    source: str


def faces_of(shape: TopoDS_Shape) -> list[TopoDS_Face]:
    """The faces of a shape, each once (TopoDS_Shape.IsSame), in exploration order."""
    found, seen = [], {}
    explorer = TopExp_Explorer(shape, TopAbs_FACE)
    while explorer.More():
        face = TopoDS.Face(explorer.Current())
        same_hash = seen.setdefault(hash(face), [])
        if not any(face.IsSame(other) for other in same_hash):
            same_hash.append(face)
            found.append(face)
        explorer.Next()
    return found


def read_step(path: str | Path) -> Brep:
    """Read a .step/.stp file into a Brep; InputError (one line) when it cannot be used.

    Parameters
    ----------
    path : str or Path
        A STEP file (ISO 10303-21 clear text).

    Returns
    -------
    Brep
        The shape with its faces and face names (the entity names, else ``face-N``).
    """
    name = str(path)
    reader = STEPControl_Reader()
    with silenced():
        status = reader.ReadFile(name)
        if status != IFSelect_RetDone:
            raise InputError(f"{name}: cannot be read as STEP (the kernel's parser rejected it)")
        reader.TransferRoots()
        shape = reader.OneShape()
    if shape is None or shape.IsNull():
        raise InputError(f"{name}: the STEP file holds no shape")
    faces = faces_of(shape)
    if not faces:
        raise InputError(f"{name}: the STEP file holds no faces (no surface geometry to grade)")
    return Brep(shape, tuple(faces), _face_names(reader, faces), name)


def _face_names(reader: STEPControl_Reader, faces: list[TopoDS_Face]) -> tuple[str, ...]:
    """Each face's STEP entity name; ``face-N`` where it has none or shares it with another face."""
    transfer = reader.WS().TransferReader()
    names = []
    for face in faces:
        entity = transfer.EntityFromShapeResult(face, 1)
        label = entity.Name().ToCString().strip() if entity is not None and hasattr(entity, "Name") else ""
        names.append(label)
    repeated = {n for n in names if names.count(n) > 1}
    return tuple(n if n and n not in repeated else f"face-{i}" for i, n in enumerate(names, start=1))
