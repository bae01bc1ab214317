import numpy as np
import pytest

from assimilation.trophic import trophic_class, tsi_chlorophyll, tsi_secchi, tsi_total_phosphorus


@pytest.mark.parametrize("secchi, expected", [(1.0, 60.00), (2.0, 50.01)])
def test_tsi_secchi_matches_carlson_worked_values(secchi, expected):
    # Carlson (1977) Limnol. Oceanogr. 22:361, TSI(SD) = 60 − 14.41 ln SD; worked values in docs/references.md [computed]
    assert tsi_secchi(secchi) == pytest.approx(expected, abs=0.005)


@pytest.mark.parametrize("chl, expected", [(1.0, 30.60), (20.0, 59.99)])
def test_tsi_chlorophyll_matches_carlson_worked_values(chl, expected):
    # Carlson (1977), TSI(Chl) = 9.81 ln Chl + 30.6 [computed]
    assert tsi_chlorophyll(chl) == pytest.approx(expected, abs=0.005)


@pytest.mark.parametrize("tp, expected", [(24.0, 49.98), (96.0, 69.97)])
def test_tsi_total_phosphorus_matches_carlson_worked_values(tp, expected):
    # Carlson (1977), TSI(TP) = 14.42 ln TP + 4.15 [computed]
    assert tsi_total_phosphorus(tp) == pytest.approx(expected, abs=0.005)


def test_tsi_halving_secchi_depth_adds_ten_units():
    # Carlson (1977): the index is built so that each halving of Secchi depth adds 10 units
    assert tsi_secchi(0.5) - tsi_secchi(1.0) == pytest.approx(10.0, abs=0.02)


def test_tsi_functions_are_vectorised():
    out = tsi_chlorophyll(np.array([1.0, 20.0]))
    np.testing.assert_allclose(out, [30.60, 59.99], atol=0.005)


@pytest.mark.parametrize("tsi, label", [
    (35.0, "oligotrophic"), (40.0, "mesotrophic"), (49.9, "mesotrophic"),
    (50.0, "eutrophic"), (70.0, "eutrophic"), (70.1, "hypereutrophic"),
])
def test_trophic_class_uses_carlson_boundaries(tsi, label):
    # classes: oligotrophic < 40, mesotrophic 40–50, eutrophic 50–70, hypereutrophic > 70 (docs/references.md)
    assert trophic_class(tsi) == label


def test_tsi_rejects_non_positive_values():
    with pytest.raises(ValueError, match="chl_ugL must be positive"):
        tsi_chlorophyll(0.0)
    with pytest.raises(ValueError, match="tsi must be a finite number"):
        trophic_class(float("nan"))


def test_model_secchi_depth_and_total_phosphorus_feed_carlson_indices():
    from model_scenarios import three_basin_spec

    from assimilation import budget
    from assimilation.spec import StateLayout

    spec = three_basin_spec()
    layout = StateLayout(spec)
    E = layout.pack(np.full((1, 3), 200.0), np.full((1, 3), 20.0), np.array([[[10.0, 10.0], [0.0, 0.0], [1.0, 0.0]]]))
    sd = budget.secchi_depth(E, spec)[0]
    # SD = 1.7 / (0.8 + 0.016·20) = 1.518 m (rule of thumb Kd ≈ 1.7/SD, docs/references.md)
    assert sd[0] == pytest.approx(1.7 / (0.8 + 0.016 * 20.0))
    assert sd[1] > sd[0]
    # TP = SRP + algal P = 20 + 20·50/41 = 44.4 µg/L → TSI(TP) = 14.42 ln 44.4 + 4.15 = 58.8 (Carlson 1977)
    tp = budget.total_phosphorus(E, spec)[0, 0]
    assert tp == pytest.approx(20.0 + 20.0 * 50.0 / 41.0)
    assert tsi_total_phosphorus(tp) == pytest.approx(58.8, abs=0.05)
    assert trophic_class(tsi_total_phosphorus(tp)) == "eutrophic"
