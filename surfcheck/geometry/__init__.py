"""Differential geometry of triangle meshes: neighbours, jet fits, normals, curvatures, jump fields, primitive fits."""
