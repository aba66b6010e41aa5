"""surfcheck: grade the G0-G3 continuity of seams on triangle meshes and build blend patches.

The public names below are imported on first use (PEP 562 module __getattr__), so that `import surfcheck`
and the start of the command line stay light (and Ctrl-C during start-up can be answered in one line).
"""

from importlib import import_module

from surfcheck.version import __version__

_EXPORTS = {
    "Curvature": "surfcheck.geometry.differential",
    "Curve": "surfcheck.seams",
    "GradeOptions": "surfcheck.grading.run",
    "GradeRun": "surfcheck.grading.run",
    "InputError": "surfcheck.errors",
    "Part": "surfcheck.part",
    "SeamGrade": "surfcheck.grading.continuity",
    "SeamIndex": "surfcheck.seams",
    "Status": "surfcheck.grading.status",
    "SurfcheckError": "surfcheck.errors",
    "ToleranceProfile": "surfcheck.grading.tolerances",
    "build_blend": "surfcheck.blend.patch",
    "curvature_jump_field": "surfcheck.geometry.jumpfield",
    "gaussian_curvature": "surfcheck.geometry.differential",
    "grade_part": "surfcheck.grading.run",
    "grade_seam": "surfcheck.grading.run",
    "load_part": "surfcheck.io",
    "load_profile": "surfcheck.grading.tolerances",
    "mean_curvature": "surfcheck.geometry.differential",
    "partition_of_unity": "surfcheck.blend.steps",
    "principal_curvatures": "surfcheck.geometry.differential",
    "read_part": "surfcheck.io",
    "save_part": "surfcheck.io",
    "segment_part": "surfcheck.segmentation.segment",
    "smooth_step": "surfcheck.blend.steps",
    "tangent_jump_field": "surfcheck.geometry.jumpfield",
    "vertex_normals": "surfcheck.geometry.differential",
}
__all__ = sorted(_EXPORTS)


def __getattr__(name: str):
    """The public name ``name``, imported from its module on first use."""
    if name not in _EXPORTS:
        raise AttributeError(f"module 'surfcheck' has no attribute {name!r}")
    value = getattr(import_module(_EXPORTS[name]), name)
    globals()[name] = value
    return value
