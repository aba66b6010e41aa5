"""The facts about a loaded part that `surfcheck inspect` shows: size, groups, boundaries, defects."""

from __future__ import annotations

import numpy as np

from surfcheck.io import LoadResult
from surfcheck.seams import SeamIndex
from surfcheck.validation import defect_summary


def part_summary(loaded: LoadResult) -> dict:
    """A JSON-ready summary of a part and of what loading it found."""
    part = loaded.part
    lengths = part.edge_lengths
    areas = part.group_areas()
    counts = np.bincount(part.face_group, minlength=len(part.group_names))
    seams = SeamIndex(part)
    return {
        "source": part.source,
        "units": part.units,
        "vertices": part.n_vertices,
        "faces": part.n_faces,
        "merged_vertices": loaded.merged_vertices,
        "bounding_box": {"min": part.bounds[0].tolist(), "max": part.bounds[1].tolist(),
                         "diagonal": part.diagonal},
        "area": float(part.face_areas.sum()),
        "groups": [{"name": name, "faces": int(counts[i]), "area": float(areas[i])}
                   for i, name in enumerate(part.group_names)],
        "edge_length": {"min": float(lengths.min()), "median": float(np.median(lengths)),
                        "mean": float(lengths.mean()), "max": float(lengths.max())},
        "boundary_loops": len(seams.loops),
        "group_seams": len(seams.seams),
        "defects": defect_summary(part),
        "warnings": list(loaded.warnings),
    }
