"""Write Bloomline's second invented scenario, Brackenfold Mere: two seasons of exports and their truth.

The work is done by the ``brackenfold`` package next to this script (see its
docstring and brackenfold/README.md); this script is its command line.

Usage::

    python sample_feeds/generate_brackenfold.py --seed 20250415 [--out sample_feeds/brackenfold/data]

numpy, pandas and scipy only.
"""
from __future__ import annotations

import argparse
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
if str(HERE) not in sys.path:   # `python sample_feeds/generate_brackenfold.py` already puts HERE first
    sys.path.insert(0, str(HERE))

from brackenfold import generate  # after HERE is on sys.path

DEFAULT_SEED = 20250415
DEFAULT_OUT = HERE / "brackenfold" / "data"


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seed", type=int, default=DEFAULT_SEED)
    parser.add_argument("--out", type=Path, default=DEFAULT_OUT)
    args = parser.parse_args(argv)
    print(generate(args.seed, args.out))


if __name__ == "__main__":
    main()
