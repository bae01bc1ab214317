import numpy as np
import pytest

from assimilation import kinetics
from assimilation.parameters import THETA_EPPLEY


def test_monod_term_is_one_half_at_the_half_saturation_constant():
    # Monod (1950): S/(K + S) = 1/2 at S = K (common practice)
    assert kinetics.monod(12.5, 12.5) == pytest.approx(0.5)


def test_nutrient_limitation_takes_the_minimum_of_nitrogen_and_phosphorus_terms():
    # Liebig's law of the minimum (Chapra 1997, ch. 33)
    f = kinetics.nutrient_limitation(nitrogen=np.array([15.0, 300.0]), phosphorus=np.array([100.0, 2.0]),
                                     k_n=15.0, k_p=2.0)
    np.testing.assert_allclose(f, [0.5, 0.5])
    f = kinetics.nutrient_limitation(nitrogen=45.0, phosphorus=2.0, k_n=15.0, k_p=2.0)
    assert f == pytest.approx(0.5)


def test_temperature_factor_with_eppley_theta_reproduces_eppley_curve():
    # Eppley (1972) Fish. Bull. 70:1063: log10 mu = 0.0275 T − 0.070, relative to 20 °C
    T = np.array([5.0, 12.0, 20.0, 28.0])
    eppley = 10 ** (0.0275 * T - 0.070) / 10 ** (0.0275 * 20.0 - 0.070)
    np.testing.assert_allclose(kinetics.temperature_factor(THETA_EPPLEY, T), eppley, rtol=1e-12)
    # and the theta ≈ 1.066 quoted beside it (docs/references.md)
    assert THETA_EPPLEY == pytest.approx(1.066, abs=1e-3)


def test_growth_rate_equals_product_of_factors_and_broadcasts_over_members_basins_groups():
    mu_max = np.array([[[2.0, 1.1]], [[1.8, 1.0]]])         # (M=2, 1, G=2)
    T = np.array([15.0, 25.0, 20.0])[:, None]                 # (B=3, 1)
    N = np.full((2, 3, 1), 15.0)
    P = np.full((2, 3, 1), 100.0)
    k_n = np.array([15.0, 5.0])
    mu = kinetics.growth_rate(mu_max, np.array([1.066, 1.10]), T, 0.5, N, P, k_n, np.array([2.0, 3.0]))
    assert mu.shape == (2, 3, 2)
    # member 1, basin at 25 °C, green algae: N term 15/30 = 0.5 < P term 100/102
    assert mu[1, 1, 0] == pytest.approx(1.8 * 1.066 ** 5 * 0.5 * 0.5)
    # member 0, basin at 20 °C, cyanobacteria: N term 15/20 = 0.75 < P term 100/103
    assert mu[0, 2, 1] == pytest.approx(1.1 * 0.5 * 0.75)


def test_sediment_release_doubles_about_every_nine_degrees_with_theta_1_08():
    # Arrhenius form (Bowie et al. 1985): 1.08**9 ≈ 2.0 (computed)
    r20 = kinetics.sediment_phosphorus_release(1.0, 1.08, 20.0, 2.0)
    r29 = kinetics.sediment_phosphorus_release(1.0, 1.08, 29.0, 2.0)
    assert r20 == pytest.approx(0.5)          # 1 mg/m²/d over 2 m = 0.5 mg/m³/d = 0.5 µg/L/d
    assert r29 / r20 == pytest.approx(1.08 ** 9)


def test_denitrification_rate_follows_arrhenius_with_theta_1_045():
    # first-order DIN loss with theta 1.045 (Chapra 1997, ch. 28; from memory)
    assert kinetics.denitrification_rate(0.02, 1.045, 20.0) == pytest.approx(0.02)
    assert kinetics.denitrification_rate(0.02, 1.045, 30.0) == pytest.approx(0.02 * 1.045 ** 10)


def test_fixer_nitrogen_limitation_has_its_floor_and_takes_only_the_din_share_from_din():
    # floor form (PCLake / CAEDYM, from memory): f_N = max(N/(K+N), floor), DIN share = (N/(K+N)) / f_N
    N = np.array([0.0, 1.0, 5.0, 20.0])
    f_n, share = kinetics.nitrogen_limitation_with_fixation(N, 5.0, 0.5)
    np.testing.assert_allclose(f_n, [0.5, 0.5, 0.5, 0.8])
    np.testing.assert_allclose(share, [0.0, (1.0 / 6.0) / 0.5, 1.0, 1.0])
    # a non-fixer (floor 0) keeps the Monod term and takes all its N from DIN
    f_plain, share_plain = kinetics.nitrogen_limitation_with_fixation(N, 5.0, 0.0)
    np.testing.assert_allclose(f_plain, kinetics.monod(N, 5.0))
    np.testing.assert_allclose(share_plain, 1.0)


def test_group_rejects_a_fixation_growth_fraction_outside_zero_to_one():
    from assimilation.spec import Group
    with pytest.raises(ValueError, match=r"fixation_growth_fraction must be in \(0, 1\]"):
        Group("bad_fixer", 1.0, 1.07, 5.0, 1.0, 50.0, 0.1, 1.08, 0.0, nitrogen_fixing=True,
              fixation_growth_fraction=1.5)
