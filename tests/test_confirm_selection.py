"""Which cells a [confirm] table chooses: small integer maps with the expected sets written out
by hand (sweepcli.run.confirm.select_cells)."""

import numpy as np

from sweepcli.run.confirm import select_cells

# Three regions: 0 (top left), 1 (right), 2 (bottom left); axis 0 runs down, axis 1 across.
MAP = np.array([[0, 0, 0, 1],
                [0, 0, 0, 1],
                [0, 0, 1, 1],
                [2, 2, 1, 1],
                [2, 2, 1, 1]])


def cells(mask):
    return {tuple(int(i) for i in c) for c in np.argwhere(mask)}


def test_both_sides_of_every_change_along_each_axis():
    got = select_cells([MAP], np.ones(MAP.shape, bool), per_region=0)
    # Along axis 1 (rows): 0|1 in rows 0-1 at columns 2|3, 0|1 in row 2 and 2|1 in rows 3-4 at
    # columns 1|2. Along axis 0 (columns): 0|2 at rows 2|3 in columns 0 and 1, 0|1 at rows 1|2
    # in column 2; column 3 is all 1.
    assert cells(got) == {(0, 2), (0, 3), (1, 2), (1, 3), (2, 1), (2, 2), (3, 1), (3, 2),
                          (4, 1), (4, 2), (2, 0), (3, 0)}


def test_one_representative_per_region_farthest_from_its_boundary():
    got = select_cells([MAP], np.ones(MAP.shape, bool), per_region=1, bracket=False)
    # Region 0: (1, 1) is the only cell two steps from the region's edge (all others touch
    # another region or the grid's edge). Regions 1 and 2 touch an edge everywhere: the tie goes
    # to the first cell in grid order, (0, 3) and (3, 0).
    assert cells(got) == {(1, 1), (0, 3), (3, 0)}


def test_two_per_region_spread_out():
    got = select_cells([MAP], np.ones(MAP.shape, bool), per_region=2, bracket=False)
    # Region 0: (1, 1), then every other cell scores 1 (on the rim, one step or more from (1, 1));
    # first in grid order: (0, 0). Region 1: (0, 3), then the cells of distance >= 1 from the rim
    # and from (0, 3) all score 1: (1, 3). Region 2: (3, 0) and (3, 1).
    assert cells(got) == {(1, 1), (0, 0), (0, 3), (1, 3), (3, 0), (3, 1)}


def test_representatives_of_a_long_region_are_spread():
    line = np.zeros(9, int)
    got = select_cells([line], np.ones(9, bool), per_region=3, bracket=False)
    # Distances to the ends: 1 2 3 4 5 4 3 2 1 -> the middle (4); then min(that, distance to 4):
    # 1 2 2 1 0 1 2 2 1 -> 1; then also the distance to 1: 1 0 1 1 0 1 2 2 1 -> 6.
    assert cells(got) == {(4,), (1,), (6,)}


def test_known_neighbours_of_a_missing_value_and_regions_without_it():
    values = np.array([1, 1, 0, 0, 0])
    known = np.array([True, True, False, True, True])
    got = select_cells([values], known, per_region=1)
    # Cells 1 and 3 bracket the missing cell 2, which is chosen by nothing; regions {0, 1} and
    # {3, 4} touch an edge everywhere: first cells 0 and 3.
    assert cells(got) == {(0,), (1,), (3,)}


def test_stride_every_nth_cell_along_each_axis():
    got = select_cells([MAP], np.ones(MAP.shape, bool), per_region=0, stride=2, bracket=False)
    assert cells(got) == {(0, 0), (0, 2), (2, 0), (2, 2), (4, 0), (4, 2)}


def test_two_invariants_make_regions_of_equal_pairs():
    a = np.array([0, 0, 0, 0, 0, 0])
    b = np.array([1, 1, 1, 2, 2, 2])
    got = select_cells([a, b], np.ones(6, bool), per_region=0)
    assert cells(got) == {(2,), (3,)}  # only b changes, between cells 2 and 3
    none = select_cells([a], np.ones(6, bool), per_region=0)
    assert not none.any()
