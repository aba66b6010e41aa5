"""Automatic segmentation of an unlabelled (scanned) mesh into smooth faces and fillet bands.

Method (details and thresholds in docs/segmentation.md): primitive regions are grown, merged and
refined (surfcheck.segmentation.regions); curved regions that are pieces of blend bands are found and joined into
fillet groups, whose borders with their faces are placed and straightened (surfcheck.segmentation.bands); each
fillet's radius is measured along it by cross-section circle fits (surfcheck.segmentation.fillets). Groups are named
by kind and area: plane-1, cylinder-1, torus-1, freeform-1, fillet-1, ...
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np
import scipy.sparse as sp

from surfcheck.segmentation.bands import band_pieces, refine_band_borders
from surfcheck.errors import InputError
from surfcheck.segmentation.fillets import FilletRadius, measure_fillet
from surfcheck.part import Part
from surfcheck.geometry.primitives import Primitive
from surfcheck.segmentation.regions import (compete, fit_faces, grow_regions, largest_pieces, merge_regions,
                               prepare_mesh, settle_leftovers)
from surfcheck.seams import Curve, group_seams

@dataclass(frozen=True, eq=False)
class SegmentGroup:
    """One segmented group: a face (kind plane, cylinder, sphere, cone, torus or freeform) or a fillet
    band (kind fillet, with its radius along its length)."""

    name: str
    kind: str
    faces: np.ndarray
    area: float
    primitive: Primitive | None
    residual: float
    neighbours: tuple[str, ...]
    fillet: FilletRadius | None = None

    def to_json(self) -> dict:
        out = {
            "name": self.name,
            "kind": self.kind,
            "faces": int(len(self.faces)),
            "area": round(self.area, 6),
            "fit_residual": None if not np.isfinite(self.residual) else round(self.residual, 6),
            "neighbours": list(self.neighbours),
        }
        if self.primitive is not None:
            out["primitive"] = self.primitive.kind
            out["parameters"] = self.primitive.parameters()
        if self.fillet is not None:
            out["radius"] = self.fillet.to_json()
        return out


@dataclass(frozen=True, eq=False)
class Segmentation:
    """The labelled part, its groups, and the noise level and scale the thresholds came from."""

    part: Part
    groups: tuple[SegmentGroup, ...]
    noise: float
    normal_noise: float
    scale: float
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def fillets(self) -> tuple[SegmentGroup, ...]:
        return tuple(g for g in self.groups if g.kind == "fillet")

    @property
    def faces(self) -> tuple[SegmentGroup, ...]:
        return tuple(g for g in self.groups if g.kind != "fillet")

    def group(self, name: str) -> SegmentGroup:
        self.part.group_index(name)
        return next(g for g in self.groups if g.name == name)

    def to_json(self) -> dict:
        return {
            "part": self.part.source,
            "units": self.part.units,
            "noise": round(self.noise, 6),
            "normal_noise_deg": round(float(np.degrees(self.normal_noise)), 4),
            "scale": round(self.scale, 6),
            "groups": [g.to_json() for g in self.groups],
            "notes": list(self.notes),
        }


def segment_part(
    part: Part,
    *,
    scale: float | None = None,
    noise: float | None = None,
    nominal_radius: float | None = None,
    min_face_area: float | None = None,
) -> Segmentation:
    """Split an unlabelled mesh into smooth faces and fillet bands (see the module docstring).

    ``scale``: the neighbourhood radius of the local fits (default 2.5 median edge lengths);
    ``noise``: the noise level in part units (default: estimated from the fits); ``nominal_radius``:
    the fillet radius the bands' measured radii are compared with; ``min_face_area``: smaller regions
    are merged into their neighbours (default: a disc of twice the scale).

    Parameters
    ----------
    part : Part
        The unlabelled mesh.
    scale, noise, nominal_radius, min_face_area : float, optional
        As above, part units (area: units^2).

    Returns
    -------
    Segmentation
        The part with face groups, each group's primitive or "freeform", fillet radii and seams.
    """
    where = part.source or "part"
    mesh = prepare_mesh(part, scale, noise)
    rho = mesh.scale
    min_area = np.pi * (2 * rho) ** 2 if min_face_area is None else float(min_face_area)
    min_faces = max(10, int(min_area / max(np.median(mesh.areas), 1e-300) / 4))
    label, models = merge_regions(mesh, *grow_regions(mesh, min_faces, rho))
    if not models:
        raise InputError(
            f"{where}: no smooth face found (estimated noise {mesh.noise:.3g} {part.units} against a "
            f"median edge of {np.median(part.edge_lengths):.3g}); the mesh looks like noise, not a part"
        )
    for _ in range(2):
        label = largest_pieces(mesh, compete(mesh, label, models))
        models = [fit_faces(mesh, np.flatnonzero(label == j)) if (label == j).sum() >= 3 else models[j]
                  for j in range(len(models))]
    label, freeform = settle_leftovers(mesh, label, models, min_area)
    return _assemble(part, mesh, label, models, freeform, nominal_radius, rho)


def _assemble(part, mesh, label, models, freeform, nominal_radius, rho) -> Segmentation:
    """Classify regions into faces and bands, merge band pieces, name and measure the groups."""
    used = [j for j in range(len(models)) if (label == j).any()]
    remap = -np.ones(len(models) + 1, dtype=np.int64)
    remap[used] = np.arange(len(used))
    label = remap[label]
    regions_model: list[Primitive | None] = [models[j] for j in used]
    for faces in freeform:
        label[faces] = len(regions_model)
        regions_model.append(None)
    kinds = [m.kind if m is not None else "freeform" for m in regions_model]
    pieces = band_pieces(mesh, label, regions_model)
    is_piece = pieces[label]
    comp = mesh.label_components(is_piece)
    groups_faces: list[tuple[str, np.ndarray, Primitive | None]] = []
    consumed = np.zeros(len(kinds), dtype=bool)
    for c in np.unique(comp[is_piece]):
        faces = np.flatnonzero((comp == c) & is_piece)
        outside = np.unique(label[mesh.adjacency[faces].indices])
        faces_around = [j for j in outside if not pieces[j]]
        if len(faces_around) >= 2:
            members = np.unique(label[faces])
            consumed[members] = True
            model = _band_primitive(mesh, faces, [regions_model[j] for j in members])
            groups_faces.append(("fillet", faces, model))
    for j, kind in enumerate(kinds):
        if not consumed[j]:
            groups_faces.append((kind, np.flatnonzero(label == j), regions_model[j]))
    return _named(part, mesh, refine_band_borders(mesh, groups_faces), nominal_radius, rho)


def _band_primitive(mesh, faces: np.ndarray, models: list[Primitive | None]) -> Primitive | None:
    """A band's own primitive: its piece's when it has one piece; with several, the largest piece's
    when that fits all the band's faces within 1.2 noise levels rms (pieces of one circular fillet;
    the test regions are merged by); None otherwise: a band whose curvature changes across it (a G2
    or G3 blend, ramps of larger radii around an arc: 2.6 to 11 noise levels off on the test parts)."""
    if len(models) == 1:
        return models[0]
    if any(m is None for m in models):
        return None
    model = max(models, key=lambda m: m.n_points)
    rms = float(np.sqrt(np.mean(mesh.distance(model, faces) ** 2)))
    return model if rms <= 1.2 * mesh.noise else None


def _named(part, mesh, groups_faces, nominal_radius, rho) -> Segmentation:
    areas = [float(mesh.areas[f].sum()) for _, f, _ in groups_faces]
    order = np.argsort(-np.asarray(areas), kind="stable")
    counters: dict[str, int] = {}
    names, face_group = [], np.zeros(len(mesh.F), dtype=np.int64)
    for gi, k in enumerate(order):
        kind = groups_faces[k][0]
        counters[kind] = counters.get(kind, 0) + 1
        names.append(f"{kind}-{counters[kind]}")
        face_group[groups_faces[k][1]] = gi
    labelled = part.with_groups(face_group, names)
    A = sp.triu(mesh.adjacency).tocoo()
    cross = face_group[A.row] != face_group[A.col]
    pairs = np.unique(np.sort(np.stack([face_group[A.row[cross]], face_group[A.col[cross]]], 1), axis=1), axis=0)
    groups = []
    for gi, k in enumerate(order):
        kind, faces, model = groups_faces[k]
        neighbours = tuple(names[b if a == gi else a] for a, b in pairs if gi in (a, b))
        if model is not None and kind != "fillet":
            model = fit_faces(mesh, faces)
        residual = float(np.sqrt(np.mean(model.signed_distance(mesh.V[np.unique(mesh.F[faces])]) ** 2))) if model is not None else float("nan")
        fillet = None
        if kind == "fillet":
            fillet = measure_fillet(labelled, gi, mesh.shape.normals, rho, nominal_radius)
            residual = fillet.section_rms
        groups.append(SegmentGroup(names[gi], kind, faces, areas[k], model, residual, neighbours, fillet))
    notes = []
    if not any(g.kind == "fillet" for g in groups):
        notes.append("no fillet bands found" + ("; no seams found: the part is one face" if len(groups) == 1 else ""))
    return Segmentation(labelled, tuple(groups), mesh.noise, mesh.normal_noise, rho, tuple(notes))


def seams_of_segmentation(seg: Segmentation) -> list[Curve]:
    """The seams of every fillet band with its faces, as Curves of kind "seam" with groups
    (face, fillet); InputError "no seams found" when the part has no fillet band."""
    fillets = {g.name for g in seg.fillets}
    if not fillets:
        raise InputError(
            f"{seg.part.source or 'part'}: no seams found: the segmentation has {len(seg.groups)} face(s) "
            "and no fillet band (" + ", ".join(g.name for g in seg.groups) + ")"
        )
    found = []
    for curve in group_seams(seg.part):
        a, b = curve.groups
        if (a in fillets) == (b in fillets):
            continue
        found.append(curve if b in fillets else replace(curve, groups=(b, a)))
    return found
