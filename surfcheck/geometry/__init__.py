"""Differential geometry of triangle meshes: neighbours, jet fits, normals, curvatures, jump fields, primitive fits."""

from surfcheck.geometry.kernelcache import use_writable_cache

use_writable_cache()  # before the modules of this package define their compiled kernels
