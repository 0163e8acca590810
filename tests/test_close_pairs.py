"""The coincident-node search against scipy's k-d tree (an independent implementation)."""
import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.spatial import cKDTree

from cablefe.model.report import close_pairs


# the verify fixture only records, so one instance may serve every example
@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(0, 300), planted=st.integers(0, 40),
       scale=st.sampled_from([1e-3, 1.0, 1e3, 5e6]))
def test_close_pairs_match_a_kd_tree(verify, seed, n, planted, scale):
    # source: scipy.spatial.cKDTree.query_pairs (Maneewongvatana & Mount 1999
    # sliding-midpoint k-d tree), which returns every pair within r.
    rng = np.random.default_rng(seed)
    tol = 1e-9 * scale * 10
    points = rng.uniform(0.0, scale * 10, size=(n, 3))
    if n and planted:
        # near-duplicates on both sides of the tolerance, and exact copies
        src = points[rng.integers(0, n, planted)]
        step = rng.normal(size=src.shape)
        step *= (tol * rng.choice([0.0, 0.5, 0.999, 1.001, 2.0], size=planted) /
                 np.maximum(np.linalg.norm(step, axis=1), 1e-300))[:, None]
        points = np.vstack([points, src + step])
    expected = cKDTree(points).query_pairs(tol, output_type="ndarray") if len(points) else np.empty((0, 2))
    got = close_pairs(points, tol)
    found = sorted({tuple(p) for p in got.tolist()})
    reference = sorted({tuple(sorted(p)) for p in np.asarray(expected).tolist()})
    # pairs as sorted lists, compared exactly (a different set differs in length or entries)
    assert len(found) == len(reference)
    verify.check("coincident-node search on up to 340 random points with planted near-duplicates: "
                 "every pair closer than 1e-9 of the model size", "scipy.spatial.cKDTree.query_pairs "
                 "(Maneewongvatana & Mount 1999, sliding-midpoint k-d tree)",
                 np.reshape(found, (-1, 2)), np.reshape(reference, (-1, 2)))


def test_grid_of_equal_rows_finds_only_exact_copies():
    # a regular grid shares coordinates along rows and columns: no pair is
    # close except the copies planted on purpose
    x, y = np.meshgrid(np.arange(50.0), np.arange(50.0))
    points = np.column_stack([x.ravel(), y.ravel(), np.zeros(x.size)])
    points = np.vstack([points, points[[7, 1234]]])
    assert close_pairs(points, 1e-9 * 50).tolist() == [[7, 2500], [1234, 2501]]
