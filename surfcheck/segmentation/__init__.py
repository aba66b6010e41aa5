"""Segmentation of unlabelled parts into faces and fillet bands, and transfer of a nominal's groups."""
