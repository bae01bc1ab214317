import numpy as np
import pytest
from scipy.integrate import quad

from assimilation import light


def test_steele_curve_peaks_at_one_at_the_saturating_irradiance():
    # Steele (1962) Limnol. Oceanogr. 7:137: f(Is) = 1 is the maximum
    I = np.linspace(1.0, 400.0, 4000)
    f = light.steele(I, 80.0)
    assert light.steele(80.0, 80.0) == pytest.approx(1.0)
    assert f.max() <= 1.0 + 1e-12
    assert I[f.argmax()] == pytest.approx(80.0, abs=0.1)


@pytest.mark.parametrize("I0, Is, k, H", [
    (400.0, 80.0, 1.2, 3.0),
    (50.0, 80.0, 0.5, 8.0),
    (900.0, 50.0, 3.0, 2.0),
    (10.0, 120.0, 0.05, 0.5),
])
def test_depth_averaged_steele_factor_equals_quadrature_of_point_factor(I0, Is, k, H):
    # Di Toro et al. (1971) closed form against scipy.integrate.quad of f(I0·exp(−k z)) over 0..H
    numeric, _ = quad(lambda z: light.steele(I0 * np.exp(-k * z), Is), 0.0, H, epsabs=1e-13, epsrel=1e-12)
    assert light.steele_depth_average(I0, Is, k, H) == pytest.approx(numeric / H, rel=1e-9)


def test_depth_averaged_steele_factor_without_attenuation_is_the_surface_value():
    assert light.steele_depth_average(60.0, 80.0, 0.0, 3.0) == pytest.approx(light.steele(60.0, 80.0))


def test_self_shading_adds_chlorophyll_specific_attenuation():
    # Beer–Lambert with k = k_bg + k_chl·Chl (Chapra 1997, ch. 33): 50 µg/L × 0.016 m²/mg = 0.8 /m
    assert light.attenuation_coefficient(0.8, 0.016, 50.0) == pytest.approx(1.6)


def test_secchi_depth_follows_the_1_7_rule():
    # Kd ≈ 1.7 / Secchi depth (rule of thumb, docs/references.md [verified])
    assert light.secchi_depth(0.85) == pytest.approx(2.0)


def test_step_mean_steele_factor_equals_weighted_sum_of_point_values():
    I0 = np.array([[0.0, 120.0], [300.0, 40.0], [610.0, 5.0]])        # (Q=3, B=2)
    w = np.array([5.0, 8.0, 5.0]) / 18.0
    k = np.array([[0.9, 2.5], [1.4, 0.7]])                             # (M=2, B=2)
    expected = sum(wq * light.steele_depth_average(I0[q], 80.0, k, np.array([3.0, 8.0]))
                   for q, wq in enumerate(w))
    got = light.steele_depth_average_mean(I0, w, 80.0, k, np.array([3.0, 8.0]))
    np.testing.assert_allclose(got, expected, rtol=1e-13)
