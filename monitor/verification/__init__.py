"""Forecast verification: hindcast replays, observed series, baselines and scores of issued runs."""
