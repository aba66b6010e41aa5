"""Alignment of a scan made from a nominal part by a known rigid motion plus noise, and transfer of the
nominal's face groups. The true motion and the true groups are known by construction; the acceptance
figures (aligned within a small fraction of the edge length, more than 98 % of faces in the right
group) are the issue's requirements (common practice, no published source)."""

import numpy as np
import pytest

from surfcheck.errors import InputError
from surfcheck.transfer import align, transfer_groups
from synthetic_parts import bracket, housing, scanned

NOISE = 0.02


def rotation_error_deg(M: np.ndarray) -> float:
    return float(np.degrees(np.arccos(np.clip((np.trace(M[:3, :3]) - 1) / 2, -1, 1))))


@pytest.mark.parametrize("make, seed", [(bracket, 5), (housing, 6)])
def test_scan_is_aligned_back_and_every_face_gets_its_group(make, seed):
    nominal, _ = make()
    scan, motion = scanned(nominal, NOISE, seed=seed)
    alignment = align(scan, nominal)
    edge = float(np.median(nominal.edge_lengths))
    back = alignment.matrix @ motion  # identity when the alignment undoes the motion
    aligned = alignment.apply(scan.vertices)
    # each scan vertex was made from the nominal vertex of the same index: it must come back to it
    # within the noise we added plus a small fraction of the edge length
    clean_scan, _ = scanned(nominal, 0.0, seed=seed)
    drift = np.linalg.norm(alignment.apply(clean_scan.vertices) - nominal.vertices, axis=1)
    assert drift.max() < 0.02 * edge
    assert rotation_error_deg(back) < 0.05
    assert alignment.rms == pytest.approx(NOISE, rel=0.25)  # what is left is the scanner's noise
    assert np.abs(np.linalg.norm(aligned - nominal.vertices, axis=1)).mean() < 2 * NOISE
    labelled = transfer_groups(nominal, scan, alignment)
    assert labelled.group_names == nominal.group_names
    assert (labelled.face_group == nominal.face_group).mean() > 0.98


def test_transfer_aligns_on_its_own_and_keeps_the_scan_geometry():
    nominal, _ = bracket()
    scan, _ = scanned(nominal, NOISE, seed=8)
    labelled = transfer_groups(nominal, scan)
    assert np.array_equal(labelled.vertices, scan.vertices) and np.array_equal(labelled.faces, scan.faces)
    assert (labelled.face_group == nominal.face_group).mean() > 0.98


def test_a_nominal_without_groups_is_refused():
    nominal, _ = bracket()
    scan, _ = scanned(nominal, NOISE, seed=9)
    with pytest.raises(InputError, match="face groups"):
        transfer_groups(scan, scan)
