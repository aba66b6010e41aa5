"""surfcheck: grade the G0-G3 continuity of seams on triangle meshes and build blend patches."""

from surfcheck.errors import InputError, SurfcheckError
from surfcheck.part import Part

__all__ = ["InputError", "Part", "SurfcheckError"]
__version__ = "0.1.0"
