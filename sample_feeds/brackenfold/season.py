"""Both seasons of Brackenfold Mere, end to end: force, run the truth, observe, write, summarise."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from .forcing import make_forcing
from .sampling import observe
from .setting import SEASONS
from .summary import daily_truth, summary_text
from .truth import run_truth
from .writers import write_export, write_truth


def generate(seed: int, out_dir: Path) -> str:
    """Write the exports and the truth of every season for ``seed`` under ``out_dir``; return the summary.

    Each season draws from its own child generators of ``seed`` (one for the
    forcing, one for the sampling), so the same seed writes the same bytes and
    a change to one season's sampling never shifts another's weather.
    """
    out_dir = Path(out_dir)
    daily, events, storms = [], [], {}
    for season, seq in zip(SEASONS, np.random.SeedSequence(seed).spawn(len(SEASONS))):
        rng_forcing, rng_sampling = (np.random.default_rng(s) for s in seq.spawn(2))
        forcing, season_storms = make_forcing(rng_forcing, season)
        states = run_truth(forcing, season)
        rows, season_events = observe(rng_sampling, forcing, states)
        write_export(out_dir, season.year, rows)
        dates = pd.DatetimeIndex(forcing["date"])
        storms[season.year] = [(f"{dates[d]:%Y-%m-%d}", m) for d, m in season_storms]
        events += [{"season": season.year, "kind": "storm", "date": d, "detail": f"magnitude {m:.2f}"}
                   for d, m in storms[season.year]]
        strat = forcing["stratified"].to_numpy()
        if strat.any():
            first, last = int(np.argmax(strat)), len(strat) - 1 - int(np.argmax(strat[::-1]))
            events.append({"season": season.year, "kind": "stratified", "date": f"{dates[first]:%Y-%m-%d}",
                           "detail": f"first stratified day; last {dates[last]:%Y-%m-%d}"})
        events += [{"season": season.year, **e} for e in season_events]
        daily.append(daily_truth(forcing, states, season))
    table = pd.concat(daily, ignore_index=True)
    write_truth(out_dir, table, events)
    return summary_text(table, storms)
