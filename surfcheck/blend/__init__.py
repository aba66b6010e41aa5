"""Blend patches of a chosen order from smooth-step partitions of unity."""
