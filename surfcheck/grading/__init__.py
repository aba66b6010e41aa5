"""Continuity grading of seams: stations and sections, side fits, uncertainty, G0..G3 decisions, documents."""
