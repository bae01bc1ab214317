"""Flow network: constant-volume outflows and the transport operator."""
import numpy as np
import pytest

from assimilation import hydraulics
from assimilation.parameters import default_spec
from assimilation.spec import Basin, Network


def branching_spec():
    # two arms (0, 1) join a middle basin (2), which drains to a dam basin (3) and out
    basins = tuple(Basin(f"basin_{i}", volume_m3=v, mean_depth_m=3.0, area_m2=v / 3.0)
                   for i, v in enumerate((2e6, 3e6, 1e7, 2e7)))
    return default_spec(basins, Network(downstream=(2, 2, 3, -1), inflow_basin=(0, 1, 2)))


def test_outflow_of_each_basin_is_the_sum_of_what_enters_it():
    # constant volume: Q_out = external inflow + upstream outflows (Chapra 1997, ch. 6)
    spec = branching_spec()
    Q = hydraulics.basin_outflows(spec.network, np.array([1.0, 2.0, 0.5]))
    np.testing.assert_allclose(Q, [1.0, 2.0, 3.5, 3.5])


def test_transport_operator_conserves_mass_except_what_leaves_the_network():
    spec = branching_spec()
    q = np.array([1.0, 2.0, 0.5])
    L = hydraulics.transport_matrix(spec, q)                    # [1/d]
    V = np.array([b.volume_m3 for b in spec.basins])
    leaving = V @ L                                              # d(Σ V C)/dt per unit C in each basin [m³/d]
    Q = hydraulics.basin_outflows(spec.network, q) * 86400.0
    np.testing.assert_allclose(leaving, [0.0, 0.0, 0.0, -Q[3]], atol=1e-6 * Q[3])
    # dilution rate D = Q/V on the diagonal
    assert L[2, 2] == pytest.approx(-3.5 * 86400.0 / 1e7)


def test_inflow_source_is_load_over_volume():
    spec = branching_spec()
    conc = np.zeros((3, 4))
    conc[1, 0] = 300.0                                          # 300 µg N/L in the second inflow
    s = hydraulics.inflow_source(spec, np.array([1.0, 2.0, 0.5]), conc)
    assert s[1, 0] == pytest.approx(2.0 * 300.0 * 86400.0 / 3e6)
    assert np.count_nonzero(s) == 1
