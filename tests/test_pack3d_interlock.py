"""No interlocking: the checker flags chained parts, and the packer never chains them."""

import numpy as np
import trimesh

from packer.pack3d import Body, BuildPlacement, pack_builds, verify_build
from packer.pack3d.interlock import CellSet, pair_separable, stuck_parts

SPACING, MARGIN = 3.0, 2.0


def at(x, y, z, rot=None):
    t = np.eye(4)
    if rot is not None:
        t[:3, :3] = rot
    t[:3, 3] = (x, y, z)
    return t


ABOUT_X = np.array([[1.0, 0, 0], [0, 0, -1], [0, 1, 0]])  # quarter turn: the xy plane becomes the xz plane


def dumbbell():
    """A rod of radius 4 and length 60 with discs of radius 20 at both ends (z from 0 to 72)."""
    shaft = trimesh.creation.cylinder(radius=4, height=64, sections=24)
    shaft.apply_translation((0, 0, 36))
    caps = [trimesh.creation.cylinder(radius=20, height=6, sections=32) for _ in range(2)]
    caps[0].apply_translation((0, 0, 3))
    caps[1].apply_translation((0, 0, 69))
    return trimesh.boolean.union([shaft, *caps])


def ring():
    """Torus, major radius 22, tube radius 4: hole radius 18 (smaller than the discs)."""
    return trimesh.creation.torus(22, 4, major_sections=48, minor_sections=16)


def spaced(bodies, placements, volume):
    return verify_build(bodies, placements, volume=volume, spacing=SPACING, margin=MARGIN)


def test_ring_on_the_rod_between_the_discs_is_flagged():
    bodies = [Body(dumbbell()), Body(ring())]
    volume = (80.0, 80.0, 90.0)
    placements = [BuildPlacement(0, at(40, 40, 5)), BuildPlacement(1, at(40, 40, 5 + 36))]
    mgr = trimesh.collision.CollisionManager()  # the pair keeps the spacing (python-fcl): only the chain is wrong
    mgr.add_object("a", bodies[0].mesh, transform=placements[0].transform)
    assert mgr.min_distance_single(bodies[1].mesh, transform=placements[1].transform) >= SPACING
    probs = spaced(bodies, placements, volume)
    assert probs and all("interlocked" in p for p in probs)


def test_ring_above_the_rod_is_accepted():
    bodies = [Body(dumbbell()), Body(ring())]
    volume = (80.0, 80.0, 100.0)
    placements = [BuildPlacement(0, at(40, 40, 5)), BuildPlacement(1, at(40, 40, 5 + 72 + 8))]
    assert spaced(bodies, placements, volume) == []


def test_straight_rod_through_a_ring_slides_out():
    # without end discs the ring slides off the rod along z: removable, so not flagged
    rod = trimesh.creation.cylinder(radius=4, height=70, sections=24)
    bodies = [Body(rod), Body(ring())]
    placements = [BuildPlacement(0, at(40, 40, 40)), BuildPlacement(1, at(40, 40, 40))]
    assert spaced(bodies, placements, (80.0, 80.0, 90.0)) == []


def test_two_chain_links_are_flagged():
    link = ring()
    bodies = [Body(link), Body(link)]
    # second link stands in the xz plane and passes through the first one's hole
    placements = [BuildPlacement(0, at(40, 40, 40)), BuildPlacement(1, at(62, 40, 40, ABOUT_X))]
    probs = spaced(bodies, placements, (120.0, 80.0, 80.0))
    assert len(probs) == 2 and all("interlocked" in p for p in probs)
    # pulled apart along x they are free
    placements[1] = BuildPlacement(1, at(40 + 22 + 4 + 3 + 22 + 4 + 1, 40, 40, ABOUT_X))
    assert spaced(bodies, placements, (140.0, 80.0, 80.0)) == []


def test_parts_come_out_one_after_another():
    def block(lo, shape):
        return CellSet(origin=np.array(lo), mask=np.ones(shape, dtype=bool))

    cup = block([0, 0, 0], (5, 5, 5))
    cup.mask[1:4, 1:4, 1:5] = False  # open at the top
    peg = block([2, 2, 2], (1, 1, 5))  # stands in the cup, sticks out above it
    lid = block([0, 0, 10], (5, 5, 1))  # above the peg: blocks it until the lid is gone
    assert pair_separable(peg, cup) and pair_separable(cup, peg)
    assert stuck_parts([cup, peg, lid]) == []
    # a closed box around a peg traps both
    box = block([0, 0, 0], (5, 5, 11))
    box.mask[1:4, 1:4, 1:10] = False
    assert stuck_parts([box, block([2, 2, 3], (1, 1, 2))]) == [0, 1]
    assert stuck_parts([box, block([2, 2, 3], (1, 1, 2)), block([0, 0, 12], (5, 5, 1))]) == [0, 1]


def test_packer_never_threads_the_ring_on_the_rod():
    # the narrow volume leaves no room beside the rod, so the lowest free place for the ring is
    # around the shaft between the discs; the packer must refuse it and put the ring above
    bodies = [Body(dumbbell(), "locked"), Body(ring(), "locked")]
    volume = (70.0, 70.0, 110.0)
    res = pack_builds(bodies, volume=volume, spacing=SPACING, margin=MARGIN, seconds=10, variants=1)
    assert len(res.builds) == 1 and res.unplaced == ()
    b = res.builds[0]
    assert verify_build(bodies, b.placements, volume=volume, spacing=SPACING, margin=MARGIN) == []
    tr = {p.index: p.transform for p in b.placements}
    rod_top = (bodies[0].mesh.vertices @ tr[0][:3, :3].T + tr[0][:3, 3])[:, 2].max()
    ring_bottom = (bodies[1].mesh.vertices @ tr[1][:3, :3].T + tr[1][:3, 3])[:, 2].min()
    assert ring_bottom >= rod_top + SPACING - 1e-6
