"""The documented JSON Schema of `surfcheck grade --json` (docs/grade.schema.json), for validation with
the jsonschema reference implementation of JSON Schema draft 2020-12."""

from __future__ import annotations

import json
from pathlib import Path

SCHEMA_FILE = Path(__file__).parents[1] / "docs" / "grade.schema.json"


def grade_document_schema() -> dict:
    """The schema of the whole document."""
    return json.loads(SCHEMA_FILE.read_text())


def seam_grade_schema() -> dict:
    """The schema of one seam's grade (SeamGrade.to_dict()), with the document's definitions."""
    document = grade_document_schema()
    return {"$schema": document["$schema"], "$defs": document["$defs"], "$ref": "#/$defs/seam"}
