"""Reading and writing parts: STL (ASCII and binary), OBJ (g/o groups), PLY (ASCII and binary); STEP
is read through cad/ (one group per B-rep face, tessellated within a chordal deflection).

Every reader checks the file before parsing, so a truncated, garbage or absurd file fails fast with a
one-line InputError. Writers go to a temporary name, then rename.
"""

from surfcheck.io.paths import check_outputs
from surfcheck.io.reading import FORMATS, LoadResult, load_part, read_part
from surfcheck.io.weld import weld_vertices
from surfcheck.io.writing import save_part, save_vertex_field, write_atomic

__all__ = ["FORMATS", "LoadResult", "check_outputs", "load_part", "read_part", "save_part", "save_vertex_field", "weld_vertices",
           "write_atomic"]
