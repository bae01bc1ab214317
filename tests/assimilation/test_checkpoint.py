"""Checkpoints: exact round trip through bytes, and a resumed run equals one that never stopped."""
import numpy as np
import pytest
from filter_twin import FIRST_GUESS, T0_D, make_twin

from assimilation.checkpoint import Checkpoint
from assimilation.filter_config import FilterConfig
from assimilation.filter_cycle import assimilate, initial_checkpoint


def test_checkpoint_round_trips_every_bit():
    rng = np.random.default_rng(0)
    ensemble = rng.standard_normal((7, 3)) * 1e3
    ensemble[0, 0] = np.nextafter(1.0, 2.0)
    gen = np.random.default_rng(5)
    gen.standard_normal(3)
    c = Checkpoint(time_d=20605.123456789012, ensemble=ensemble, names=("a", "b:µ", "c"),
                   rng_state=gen.bit_generator.state)
    back = Checkpoint.from_bytes(c.to_bytes())
    assert back.equals(c)
    assert back.to_bytes() == c.to_bytes()
    # The restored generator continues the same stream.
    np.testing.assert_array_equal(back.rng().standard_normal(4), gen.standard_normal(4))


def test_checkpoint_rejects_foreign_bytes():
    with pytest.raises(ValueError, match="not a Bloomline checkpoint"):
        Checkpoint.from_bytes(b"PK\x03\x04 something else")


def test_checkpoint_rejects_truncated_bytes():
    c = Checkpoint(0.0, np.ones((2, 2)), ("x", "y"), np.random.default_rng(1).bit_generator.state)
    with pytest.raises(ValueError, match="body has"):
        Checkpoint.from_bytes(c.to_bytes()[:-3])


@pytest.mark.parametrize("method", ["stochastic", "sqrt"])
def test_resumed_run_equals_uninterrupted_run(method):
    twin = make_twin(6, seed=9)
    cfg = FilterConfig(members=12, method=method, n_sensors=2, model_error_log_sd_per_d=0.05)
    start = initial_checkpoint(twin.spec, cfg, T0_D, np.random.default_rng(3), initial_state=FIRST_GUESS)

    def cycles(ckpt, days, through_bytes):
        for day in days:
            if through_bytes:
                ckpt = Checkpoint.from_bytes(ckpt.to_bytes())
            ckpt = assimilate(ckpt, twin.observations, twin.spec, twin.drivers, cfg, T0_D + day).checkpoint
        return ckpt

    straight = cycles(start, range(1, 7), through_bytes=False)
    resumed = cycles(cycles(start, range(1, 4), through_bytes=False), range(4, 7), through_bytes=True)
    assert straight.equals(resumed)
    # and the random state moved on (the run did draw numbers)
    assert straight.rng_state != start.rng_state


def test_checkpoint_from_before_the_detrital_pools_is_refused_with_what_to_do():
    # a checkpoint whose state is [N, P, A_green, A_cyano] per basin (the layout before detritus):
    # resuming it would misread every column, so the cycle refuses it and says how to recover
    twin = make_twin(2, seed=9)
    s = twin.spec
    old_names = [n for b in s.basins for n in [f"{b.name}:nitrogen", f"{b.name}:phosphorus"]
                 + [f"{b.name}:chl:{g.name}" for g in s.groups]]
    old_names += [f"{key}:{g.name}" for key in ("mu_max_20_per_d", "mortality_20_per_d") for g in s.groups]
    old = Checkpoint(T0_D, np.ones((4, len(old_names))), tuple(old_names), np.random.default_rng(1).bit_generator.state)
    resumed = Checkpoint.from_bytes(old.to_bytes())
    with pytest.raises(ValueError, match=r"without detrital N and P pools .* remove this water body's stored "
                                         r"checkpoints so that the next cycle starts from a first guess"):
        assimilate(resumed, twin.observations, s, twin.drivers, FilterConfig(members=4), T0_D + 1)
