"""Scene warnings' helpers (render.scene.warnings) against reference libraries."""


def test_close_pairs_equal_scipy_kdtree_pairs():
    # Reference library: scipy.spatial.cKDTree.query_pairs (pairs within r, i < j).
    import numpy as np
    from scipy.spatial import cKDTree

    from render.scene.warnings import close_pairs

    rng = np.random.default_rng(3)
    for n, spread in ((2, 1.0), (50, 2.0), (400, 5.0)):
        points = rng.uniform(0.0, spread, (n, 3))
        points[n // 2] = points[0]  # an exact coincidence
        for r in (0.05, 0.3):
            assert close_pairs(points, r) == sorted(cKDTree(points).query_pairs(r))
