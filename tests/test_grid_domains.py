"""Block grid conventions, proportions inside solids and below topography, hard boundaries."""

import numpy as np
import pytest

import blockmodel as bm
from blockmodel.model.domains import block_proportions
from blockmodel.model.grid import BlockGrid
from blockmodel.model.solids import BOX_TRIANGLES, Surface, box_surface


def _tilted_slab(normal, offset, size=1000.0) -> Surface:
    """Half-space n.x <= offset, clipped to a big box, as a closed surface (a slanted top)."""
    n = np.asarray(normal, float)
    corners = np.array([[-size, -size], [size, -size], [size, size], [-size, size]], float)
    top = np.column_stack([corners, (offset - corners @ n[:2]) / n[2]])
    bottom = np.column_stack([corners, np.full(4, -size)])
    return Surface(np.vstack([bottom, top]), BOX_TRIANGLES.copy())


def test_grid_conventions():
    # grid module docstring: centre origin + (i + 1/2) size, flat index i + nx (j + ny k)
    g = BlockGrid((100.0, 200.0, 300.0), (10.0, 5.0, 2.0), (4, 3, 2))
    assert g.flat_index(1, 2, 1) == 1 + 4 * (2 + 3 * 1)
    np.testing.assert_allclose(g.centres([g.flat_index(1, 2, 1)])[0], [115.0, 212.5, 303.0])
    np.testing.assert_array_equal(g.ijk([23]), [[3, 2, 1]])
    assert g.block_of(np.array([[115.0, 212.5, 303.0], [0, 0, 0]])).tolist() == [21, -1]


def test_plane_cut_matches_analytic_volume():
    # A block cut by an inclined plane: the share below it is a known polyhedron volume.
    g = BlockGrid((0.0, 0.0, 0.0), (10.0, 10.0, 10.0), (1, 1, 1))
    n = np.array([0.3, 0.2, 1.0])
    offset = 5.0 + 0.3 * 5 + 0.2 * 5  # plane through the block centre
    prop = block_proportions(g, [_tilted_slab(n, offset)], subcells=(16, 16, 16))[0, 0]
    # exact: by symmetry through the centre the share is 1/2
    assert prop == pytest.approx(0.5, abs=0.02)
    offset2 = 2.0 + 0.3 * 5 + 0.2 * 5  # z = 2 - 0.3 (x-5) - 0.2 (y-5): stays inside the block
    prop2 = block_proportions(g, [_tilted_slab(n, offset2)], subcells=(16, 16, 16))[0, 0]
    assert prop2 == pytest.approx(0.2, rel=0.02)


def test_unit_cube_inside_one_block():
    # 1 m cube in a 10 m block: 1/1000 of it. Resolution of (20, 20, 20) sub-cells is
    # 0.5 m, which the cube's faces are aligned with, so the answer is exact.
    g = BlockGrid((0.0, 0.0, 0.0), (10.0, 10.0, 10.0), (2, 1, 1))
    prop = block_proportions(
        g, [box_surface((3.0, 3.0, 3.0), (4.0, 4.0, 4.0))], subcells=(20, 20, 20)
    )
    assert prop[0, 0] == pytest.approx(1e-3, abs=1e-12) and prop[1, 0] == 0


def test_priority_and_topography():
    g = BlockGrid((0.0, 0.0, 0.0), (10.0, 10.0, 10.0), (1, 1, 2))
    inner, outer = box_surface((0, 0, 0), (10, 10, 5)), box_surface((0, 0, 0), (10, 10, 20))
    topo = Surface(
        np.array([[-50, -50, 15.0], [50, -50, 15.0], [50, 50, 15.0], [-50, 50, 15.0]]),
        np.array([[0, 1, 2], [0, 2, 3]]),
    )
    prop = block_proportions(g, [inner, outer], topo, subcells=(4, 4, 4))
    np.testing.assert_allclose(prop, [[0.5, 0.5], [0.0, 0.5]])


def test_hard_boundaries_never_mix_domains(rng):
    # A domain's blocks take only its own composites: with ore all 5.0 and waste all 0.0,
    # every ore estimate is exactly a weighted mean of 5.0s.
    pts = rng.uniform(0, 100, size=(300, 3))
    values = np.where(pts[:, 2] < 50, 5.0, 0.0)
    ore = pts[:, 2] < 50
    search = bm.SearchEllipsoid((60, 60, 60), min_samples=2, max_samples=20)
    model = bm.VariogramModel(0.1, [bm.Structure("spherical", 1.0, (50, 50, 50))])
    targets = rng.uniform(0, 100, size=(50, 3))
    targets[:, 2] = rng.uniform(45, 50, size=50)
    hard = bm.krige(pts[ore], values[ore], targets, model, search, block_size=(5, 5, 5))
    np.testing.assert_allclose(hard.estimate, 5.0, rtol=1e-12)
    soft = bm.krige(pts, values, targets, model, search, block_size=(5, 5, 5))
    assert (soft.estimate < 4.9).any()
