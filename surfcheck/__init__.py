"""surfcheck: grade the G0-G3 continuity of seams on triangle meshes and build blend patches."""

from surfcheck.version import __version__

from surfcheck.grading.continuity import SeamGrade
from surfcheck.grading.run import GradeOptions, GradeRun, grade_part, grade_seam
from surfcheck.grading.status import Status
from surfcheck.geometry.differential import (
    Curvature,
    gaussian_curvature,
    mean_curvature,
    principal_curvatures,
    vertex_normals,
)
from surfcheck.errors import InputError, SurfcheckError
from surfcheck.io import load_part, read_part, save_part
from surfcheck.geometry.jumpfield import curvature_jump_field, tangent_jump_field
from surfcheck.part import Part
from surfcheck.seams import Curve, SeamIndex
from surfcheck.blend.patch import build_blend
from surfcheck.blend.steps import partition_of_unity, smooth_step
from surfcheck.segmentation.segment import segment_part
from surfcheck.grading.tolerances import ToleranceProfile, load_profile

__all__ = [
    "Curvature", "Curve", "GradeOptions", "GradeRun", "InputError", "Part", "SeamGrade", "Status", "SeamIndex", "SurfcheckError", "ToleranceProfile",
    "curvature_jump_field", "gaussian_curvature", "grade_part", "grade_seam", "load_part", "load_profile", "mean_curvature",
    "build_blend", "partition_of_unity", "principal_curvatures", "read_part", "save_part", "segment_part", "smooth_step", "tangent_jump_field",
    "vertex_normals",
]
