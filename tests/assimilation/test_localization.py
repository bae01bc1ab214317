"""Gaspari–Cohn taper and distances along the flow network."""
import numpy as np
import pytest
from scipy.sparse.csgraph import shortest_path

from assimilation import localization


def test_gaspari_cohn_matches_published_piecewise_form():
    # Gaspari and Cohn (1999), Q. J. R. Meteorol. Soc. 125:723, eq. (4.10), with c = 2:
    # r = d/c; 1 at 0; -r⁵/4 + r⁴/2 + 5r³/8 - 5r²/3 + 1 on [0, 1];
    # r⁵/12 - r⁴/2 + 5r³/8 + 5r²/3 - 5r + 4 - 2/(3r) on (1, 2); 0 beyond.
    c = 2.0
    d = np.array([0.0, 1.0, 2.0, 3.0, 4.0, 5.0])
    r = d / c
    expected = np.array([
        1.0,
        -r[1]**5 / 4 + r[1]**4 / 2 + 5 * r[1]**3 / 8 - 5 * r[1]**2 / 3 + 1,
        5.0 / 24.0,  # [computed] at r = 1: -1/4 + 1/2 + 5/8 - 5/3 + 1
        r[3]**5 / 12 - r[3]**4 / 2 + 5 * r[3]**3 / 8 + 5 * r[3]**2 / 3 - 5 * r[3] + 4 - 2 / (3 * r[3]),
        0.0,
        0.0,
    ])
    np.testing.assert_allclose(localization.gaspari_cohn(d, c), expected, atol=1e-14)


def test_gaspari_cohn_is_continuous_at_the_half_width():
    c = 1.5
    eps = 1e-9
    below, above = localization.gaspari_cohn(np.array([c - eps, c + eps]), c)
    assert abs(below - above) < 1e-8


def test_gaspari_cohn_correlation_matrix_is_positive_semidefinite():
    # The taper is a correlation function in up to three dimensions (Gaspari
    # and Cohn 1999), so on points of a line its matrix has no negative eigenvalue.
    x = np.sort(np.random.default_rng(0).uniform(0, 30, 80))
    C = localization.gaspari_cohn(np.abs(x[:, None] - x[None, :]), 3.0)
    assert np.linalg.eigvalsh(C).min() > -1e-10


def test_infinite_half_width_means_no_localization():
    np.testing.assert_array_equal(localization.gaspari_cohn(np.array([0.0, 5.0, 1e6]), np.inf), 1.0)


def test_gaspari_cohn_rejects_non_positive_half_width():
    with pytest.raises(ValueError, match="half_width must be > 0"):
        localization.gaspari_cohn(np.array([1.0]), 0.0)


@pytest.mark.parametrize("downstream", [(1, 2, -1), (2, 2, 3, -1, -1), (-1, 0, 0, 1, 1, 2), (1, -1, 3, -1)])
def test_network_hops_match_scipy_shortest_paths(downstream):
    # Reference: scipy.sparse.csgraph.shortest_path on the undirected flow graph.
    n = len(downstream)
    A = np.zeros((n, n))
    for i, d in enumerate(downstream):
        if d >= 0:
            A[i, d] = 1.0
    expected = shortest_path(A, directed=False, unweighted=True)
    np.testing.assert_array_equal(localization.network_hops(downstream), expected)


def test_periodic_distance_wraps_around():
    d = localization.periodic_distance(40)
    assert d[0, 39] == 1.0 and d[0, 20] == 20.0 and d[5, 30] == 15.0
