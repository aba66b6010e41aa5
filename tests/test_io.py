"""Loaders and writers against files written by hand to the published format descriptions and
against trimesh and meshio as reference writers."""

from __future__ import annotations

import struct

import meshio
import numpy as np
import pytest
import trimesh

from surfcheck import InputError
from surfcheck.io import load_part, read_part, save_part

# Unit cube as 12 outward triangles.
_box = trimesh.creation.box(bounds=[[0, 0, 0], [1, 1, 1]])
CUBE_V, CUBE_F = np.asarray(_box.vertices, dtype=float), np.asarray(_box.faces)


def binary_stl(triangles: np.ndarray) -> bytes:
    """Binary STL as published: 80-byte header, uint32 little-endian count, then per triangle
    12 float32 (normal, three corners) and a uint16 attribute count: 50 bytes a triangle."""
    out = b"hand-written binary STL".ljust(80, b"\0") + struct.pack("<I", len(triangles))
    for tri in triangles:
        normal = np.cross(tri[1] - tri[0], tri[2] - tri[0])
        out += struct.pack("<12fH", *normal, *tri.reshape(-1), 0)
    return out


def ascii_stl(triangles: np.ndarray) -> str:
    """ASCII STL: solid / facet normal / outer loop / vertex x3 / endloop / endfacet / endsolid."""
    lines = ["solid cube"]
    for tri in triangles:
        lines += ["facet normal 0 0 0", "outer loop", *[f"vertex {x} {y} {z}" for x, y, z in tri],
                  "endloop", "endfacet"]
    return "\n".join(lines + ["endsolid cube"]) + "\n"


def euler_characteristic(part) -> int:
    return part.n_vertices - len(part.edges) + part.n_faces


@pytest.mark.parametrize("kind", ["binary", "ascii"])
def test_stl_cube_welds_to_closed_cube(tmp_path, kind):
    path = tmp_path / "cube.stl"
    triangles = CUBE_V[CUBE_F]
    if kind == "binary":
        path.write_bytes(binary_stl(triangles))
        assert path.stat().st_size == 84 + 50 * 12  # binary STL size rule (80 + 4 + 50 n)
    else:
        path.write_text(ascii_stl(triangles))
    loaded = read_part(path)
    part = loaded.part
    assert (part.n_vertices, part.n_faces) == (8, 12)
    assert loaded.merged_vertices == 36 - 8
    assert part.face_components.max() == 0  # one component
    assert (part.edge_face_count == 2).all()  # closed: no boundary edge
    assert euler_characteristic(part) == 2  # Euler: V - E + F = 2 for a sphere-like polyhedron


def test_obj_groups_one_based_negative_indices_and_polygons(tmp_path):
    # OBJ records: `v x y z`, `f` with 1-based or negative (relative) indices, `v/vt/vn` forms,
    # `g name` opens a group; a quad is two triangles.
    text = "\n".join([
        "# two groups on a shared edge",
        "v 0 0 0", "v 1 0 0", "v 1 1 0", "v 0 1 0",
        "vt 0 0", "vn 0 0 1",
        "g floor",
        "f 1/1/1 2/1/1 3/1/1 4/1/1",
        "v 2 0 0", "v 2 1 0",
        "g ramp",
        "f -4 -2 -1",
        "f 2//1 6//1 3//1",
    ])
    path = tmp_path / "two.obj"
    path.write_text(text)
    part = load_part(path)
    assert part.group_names == ("floor", "ramp")
    assert part.n_faces == 4 and part.n_vertices == 6
    assert list(part.face_group) == [0, 0, 1, 1]
    # -1 is the last vertex defined so far (index 5), -4 the third (index 2).
    assert [tuple(map(int, f)) for f in part.faces[2:]] == [(2, 4, 5), (1, 5, 2)]


def test_ply_ascii_and_binary_group_property(tmp_path):
    # PLY header grammar: `ply`, `format ...`, `element NAME COUNT`, `property TYPE NAME`,
    # `property list COUNT_TYPE ITEM_TYPE NAME`, `end_header`.
    header = ["ply", "format ascii 1.0", "element vertex 4", "property float x", "property float y",
              "property float z", "element face 2", "property list uchar int vertex_indices",
              "property int label", "end_header"]
    body = ["0 0 0", "1 0 0", "1 1 0", "0 1 0", "3 0 1 2 7", "3 0 2 3 9"]
    (tmp_path / "a.ply").write_text("\n".join(header + body) + "\n")
    part = load_part(tmp_path / "a.ply")
    assert part.group_names == ("group-7", "group-9") and list(part.face_group) == [0, 1]

    binary = "\n".join(["ply", "format binary_little_endian 1.0", "element vertex 4",
                        "property float x", "property float y", "property float z", "element face 2",
                        "property list uchar int vertex_indices", "property uchar group", "end_header"]) + "\n"
    data = binary.encode() + struct.pack("<12f", 0, 0, 0, 1, 0, 0, 1, 1, 0, 0, 1, 0)
    data += struct.pack("<B3iB", 3, 0, 1, 2, 4) + struct.pack("<B3iB", 3, 0, 2, 3, 5)
    (tmp_path / "b.ply").write_bytes(data)
    part = load_part(tmp_path / "b.ply")
    assert part.n_faces == 2 and part.group_names == ("group-4", "group-5")


@pytest.mark.parametrize("suffix", [".stl", ".ply", ".obj"])
def test_trimesh_written_files_read_back(tmp_path, suffix):
    mesh = trimesh.creation.icosphere(subdivisions=2, radius=3.0)
    path = tmp_path / f"sphere{suffix}"
    mesh.export(path)  # trimesh as reference writer
    part = load_part(path)
    assert part.n_faces == len(mesh.faces)
    assert part.n_vertices == len(mesh.vertices)
    np.testing.assert_allclose(np.linalg.norm(part.vertices, axis=1), 3.0, rtol=1e-6)


@pytest.mark.parametrize("suffix", [".stl", ".ply", ".obj"])
def test_meshio_written_files_read_back(tmp_path, suffix):
    mesh = trimesh.creation.icosphere(subdivisions=2, radius=2.0)
    path = tmp_path / f"sphere{suffix}"
    meshio.write(path, meshio.Mesh(mesh.vertices, [("triangle", mesh.faces)]))  # meshio as reference writer
    part = load_part(path)
    assert part.n_faces == len(mesh.faces) and part.n_vertices == len(mesh.vertices)


@pytest.mark.parametrize("suffix", [".obj", ".ply", ".stl"])
def test_save_part_round_trip_keeps_geometry_and_groups(tmp_path, suffix):
    source = tmp_path / "src.obj"
    source.write_text("v 0 0 0\nv 1 0 0\nv 1 1 0\nv 0 1 0\nv 2 0 0\ng wall\nf 1 2 3\nf 1 3 4\ng fillet\nf 2 5 3\n")
    part = load_part(source)
    again = load_part(save_part(part, tmp_path / f"copy{suffix}"))
    np.testing.assert_allclose(again.vertices[again.faces], part.vertices[part.faces], atol=1e-6)
    if suffix != ".stl":  # binary STL has no groups
        assert again.group_names == part.group_names
        assert list(again.face_group) == list(part.face_group)


def test_welding_keeps_groups_and_counts_merges(tmp_path):
    # Two groups as separate triangles sharing an edge by coordinates only.
    text = "v 0 0 0\nv 1 0 0\nv 1 1 0\nv 0 0 0\nv 1 1 0\nv 0 1 0\ng a\nf 1 2 3\ng b\nf 4 5 6\n"
    (tmp_path / "w.obj").write_text(text)
    loaded = read_part(tmp_path / "w.obj")
    assert loaded.merged_vertices == 2
    assert loaded.part.n_vertices == 4 and list(loaded.part.face_group) == [0, 1]
    assert not read_part(tmp_path / "w.obj", weld=False).merged_vertices


def test_duplicate_and_collapsed_faces_are_dropped_with_warnings(tmp_path):
    text = "v 0 0 0\nv 1 0 0\nv 1 1 0\nf 1 2 3\nf 2 3 1\nf 1 1 2\n"
    (tmp_path / "d.obj").write_text(text)
    loaded = read_part(tmp_path / "d.obj")
    assert loaded.part.n_faces == 1
    assert any("duplicate" in w for w in loaded.warnings) and any("collapsed" in w for w in loaded.warnings)


def test_non_manifold_edge_is_fatal(tmp_path):
    # Three triangles on one edge: an edge of a 2-manifold has at most two (common practice).
    text = "v 0 0 0\nv 1 0 0\nv 0 1 0\nv 0 -1 0\nv 0 0 1\nf 1 2 3\nf 2 1 4\nf 1 2 5\n"
    (tmp_path / "n.obj").write_text(text)
    with pytest.raises(InputError, match="non-manifold"):
        load_part(tmp_path / "n.obj")


# STL layout: 3D Systems 1989, "StereoLithography Interface Specification" (binary: 80-byte header,
# uint32 count, 50-byte records, so exactly 84 + 50 n bytes; ASCII: solid / facet normal / outer loop /
# three vertex lines / endloop / endfacet / endsolid).

@pytest.mark.parametrize("change, size", [(-1, 683), (+1, 685), (-50, 634), (+50, 734)])
def test_binary_stl_of_the_wrong_size_is_refused_naming_both_sizes(tmp_path, change, size):
    data = binary_stl(CUBE_V[CUBE_F])
    data = data[:change] if change < 0 else data + b"\0" * change
    path = tmp_path / "cube.stl"
    path.write_bytes(data)
    with pytest.raises(InputError, match=rf"cube.stl: truncated or padded binary STL: header says 12 triangles"
                                         rf" = 684 bytes, file has {size}$"):
        load_part(path)


def test_binary_stl_whose_header_says_solid_reads_as_binary(tmp_path):
    data = b"solid cube exported as binary".ljust(80, b" ") + binary_stl(CUBE_V[CUBE_F])[80:]
    (tmp_path / "cube.stl").write_bytes(data)
    assert load_part(tmp_path / "cube.stl").n_faces == 12


def test_ascii_stl_in_capitals_with_tabs_and_crlf_reads(tmp_path):
    text = ascii_stl(CUBE_V[CUBE_F]).upper().replace("\n", "\r\n").replace(" ", "\t")
    (tmp_path / "cube.stl").write_text(text)
    part = load_part(tmp_path / "cube.stl")
    assert (part.n_vertices, part.n_faces) == (8, 12)


def test_ascii_stl_facet_missing_a_vertex_line_is_refused_not_shifted(tmp_path):
    lines = ascii_stl(CUBE_V[CUBE_F]).splitlines()
    third_facet_second_vertex = 1 + 2 * 7 + 3
    assert lines[third_facet_second_vertex].startswith("vertex")
    del lines[third_facet_second_vertex]
    (tmp_path / "cube.stl").write_text("\n".join(lines) + "\n")
    with pytest.raises(InputError, match="facet 3 is not 'facet normal"):
        load_part(tmp_path / "cube.stl")


@pytest.mark.parametrize("cut", ["0.3", "0.5", "endloop", "endsolid"])
def test_truncated_ascii_stl_is_refused(tmp_path, cut):
    text = ascii_stl(CUBE_V[CUBE_F])
    end = text.rindex(cut) if cut.startswith("end") else int(float(cut) * len(text))
    (tmp_path / "cube.stl").write_text(text[:end])
    with pytest.raises(InputError, match="truncated"):
        load_part(tmp_path / "cube.stl")


def test_ascii_stl_with_a_word_for_a_coordinate_is_refused(tmp_path):
    text = ascii_stl(CUBE_V[CUBE_F]).replace("vertex 0.0 0.0 0.0", "vertex zero 0.0 0.0", 1)
    assert "zero" in text
    (tmp_path / "cube.stl").write_text(text)
    with pytest.raises(InputError, match="not a number"):
        load_part(tmp_path / "cube.stl")


# PLY: Turk, "The PLY Polygon File Format" (header grammar: ply, format, element NAME COUNT, property
# TYPE NAME, property list COUNT_TYPE ITEM_TYPE NAME, comment and obj_info lines, end_header; binary
# records take the bytes of their types, ASCII records one a line).

def ply_header(fmt: str, faces: int = 2, comments: tuple[str, ...] = ()) -> bytes:
    lines = ["ply", f"format {fmt} 1.0", *comments, "element vertex 4", "property float x", "property float y",
             "comment between properties", "property float z", "obj_info written by hand",
             f"element face {faces}", "property list uchar int vertex_indices", "property int group", "end_header"]
    return ("\n".join(lines) + "\n").encode()


SQUARE = b"0 0 0\n1 0 0\n1 1 0\n0 1 0\n"


def test_ply_comments_anywhere_and_a_comment_end_header_line_are_read(tmp_path):
    data = ply_header("ascii", comments=("comment end_header", "comment group 5 wall")) + SQUARE
    data += b"3 0 1 2 5\n3 0 2 3 6\n"
    (tmp_path / "c.ply").write_bytes(data)
    part = load_part(tmp_path / "c.ply")
    assert part.n_faces == 2 and part.group_names == ("wall", "group-6")


def test_ply_quad_becomes_a_fan_of_two_triangles(tmp_path):
    (tmp_path / "q.ply").write_bytes(ply_header("ascii", faces=1) + SQUARE + b"4 0 1 2 3 8\n")
    part = load_part(tmp_path / "q.ply")
    assert part.n_faces == 2 and np.isclose(part.face_areas.sum(), 1.0)  # unit square


def test_binary_ply_big_endian_quads_read(tmp_path):
    data = ply_header("binary_big_endian", faces=1) + struct.pack(">12f", 0, 0, 0, 1, 0, 0, 1, 1, 0, 0, 1, 0)
    (tmp_path / "q.ply").write_bytes(data + struct.pack(">B4ii", 4, 0, 1, 2, 3, 1))
    assert load_part(tmp_path / "q.ply").n_faces == 2


@pytest.mark.parametrize("body, message", [
    (SQUARE + b"3 0 1 2 5\n", "5 record lines but its header claims 6"),  # a face missing
    (SQUARE + b"3 0 1 2 5\n3 0 2 3 6\n0 0 0\n", "header claims 6"),  # a record added
    (SQUARE[:-6] + b"3 0 1 2 5\n3 0 2 3 6\n", "header claims 6"),  # a vertex missing
    (SQUARE + b"3 0 1 2 5\n3 0 2 3\n", "face record 2 has 4 values"),  # a line cut short
    (SQUARE + b"3 0 1 2 5\n3 0 2.5 3 6\n", "not whole numbers"),  # a float index
    (SQUARE + b"3 0 1 2 5\n3 0 2 9 6\n", "does not exist"),  # an index out of range
    (SQUARE + b"3 0 1 2 5\n2 0 2 6\n", "needs 3 or more"),  # a two-corner face
])
def test_damaged_ascii_ply_is_refused(tmp_path, body, message):
    (tmp_path / "d.ply").write_bytes(ply_header("ascii") + body)
    with pytest.raises(InputError, match=message):
        load_part(tmp_path / "d.ply")


@pytest.mark.parametrize("change, message", [(-1, "truncated"), (+1, "1 bytes after its last element"),
                                             (+13, "13 bytes after")])
def test_binary_ply_of_the_wrong_size_is_refused(tmp_path, change, message):
    data = ply_header("binary_little_endian") + struct.pack("<12f", 0, 0, 0, 1, 0, 0, 1, 1, 0, 0, 1, 0)
    data += struct.pack("<B3ii", 3, 0, 1, 2, 4) + struct.pack("<B3ii", 3, 0, 2, 3, 5)
    (tmp_path / "w.ply").write_bytes(data[:change] if change < 0 else data + b"\0" * change)
    with pytest.raises(InputError, match=message):
        load_part(tmp_path / "w.ply")


def test_ply_with_float_face_indices_is_refused(tmp_path):
    header = ply_header("binary_little_endian", faces=1).replace(b"uchar int vertex", b"uchar float vertex")
    data = header + struct.pack("<12f", 0, 0, 0, 1, 0, 0, 1, 1, 0, 0, 1, 0) + struct.pack("<B3fi", 3, 0, 1, 2, 4)
    (tmp_path / "f.ply").write_bytes(data)
    with pytest.raises(InputError, match="not whole numbers"):
        load_part(tmp_path / "f.ply")


def test_ply_header_claiming_more_than_the_file_holds_is_refused_before_reading(tmp_path):
    header = ply_header("ascii").replace(b"element vertex 4", b"element vertex 400000000000")
    (tmp_path / "h.ply").write_bytes(header + SQUARE)
    with pytest.raises(InputError, match="truncated or corrupt"):
        load_part(tmp_path / "h.ply")


# OBJ records as in test_obj_groups_one_based_negative_indices_and_polygons; UTF-8 text, where a
# leading byte-order mark (U+FEFF) is allowed by the Unicode standard (section 23.8).

def test_obj_with_a_byte_order_mark_reads(tmp_path):
    (tmp_path / "bom.obj").write_bytes(b"\xef\xbb\xbfv 0 0 0\nv 1 0 0\nv 0 1 0\nf 1 2 3\n")
    assert load_part(tmp_path / "bom.obj").n_faces == 1


@pytest.mark.parametrize("face, message", [("f 1 2.7 3", r"line 4: face index '2.7' is not a whole number"),
                                           ("f 1 2 4", "not defined before it"),
                                           ("f 0 1 2", "not defined before it"),
                                           ("f 1 2 -4", "not defined before it")])
def test_obj_bad_face_indices_are_refused_naming_the_line(tmp_path, face, message):
    (tmp_path / "bad.obj").write_text(f"v 0 0 0\nv 1 0 0\nv 0 1 0\n{face}\n")
    with pytest.raises(InputError, match=message):
        load_part(tmp_path / "bad.obj")


def test_obj_coordinate_that_is_not_a_number_is_refused(tmp_path):
    (tmp_path / "bad.obj").write_text("v 0 0 0\nv 1 zero 0\nv 0 1 0\nf 1 2 3\n")
    with pytest.raises(InputError, match="line 2: vertex coordinate 'zero' is not a number"):
        load_part(tmp_path / "bad.obj")


def test_ply_declaring_an_element_twice_is_refused(tmp_path):
    header = ply_header("ascii").replace(b"element face 2\n", b"element face 2\nelement face 2\n")
    (tmp_path / "twice.ply").write_bytes(header + SQUARE + b"3 0 1 2 5\n3 0 2 3 6\n")
    with pytest.raises(InputError, match="declares element 'face' a second time"):
        load_part(tmp_path / "twice.ply")


@pytest.mark.parametrize("order", ["<", ">"])
def test_binary_ply_mixing_triangles_and_quads_reads(tmp_path, order):
    fmt = {"<": "binary_little_endian", ">": "binary_big_endian"}[order]
    header = ply_header(fmt, faces=3).replace(b"element vertex 4", b"element vertex 6")
    vertices = struct.pack(order + "18f", 0, 0, 0, 1, 0, 0, 1, 1, 0, 0, 1, 0, 2, 0, 0, 2, 1, 0)
    faces = (struct.pack(order + "B3ii", 3, 1, 4, 2, 7) + struct.pack(order + "B4ii", 4, 0, 1, 2, 3, 8)
             + struct.pack(order + "B3ii", 3, 2, 4, 5, 9))
    (tmp_path / "m.ply").write_bytes(header + vertices + faces)
    loaded = read_part(tmp_path / "m.ply")
    assert loaded.part.n_faces == 4 and loaded.part.group_names == ("group-7", "group-8", "group-9")
    assert list(loaded.part.face_group[:3]) == [0, 1, 1]  # the quad's fan keeps its group
    (tmp_path / "cut.ply").write_bytes(header + vertices + faces[:-3])
    with pytest.raises(InputError, match="truncated"):
        load_part(tmp_path / "cut.ply")
