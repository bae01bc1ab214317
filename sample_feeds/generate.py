"""Write Bloomline's invented demo scenario: one season of feeds and its truth.

Two fictional water bodies near one weather station:

* Corrisdale Reservoir (``corrisdale``), three basins in a chain
  ``fennick-arm`` -> ``middle-reach`` -> ``dam-basin``, buoys CR-FA, CR-MR, CR-DB;
* Sorrel Lake (``sorrel-lake``), one basin ``main``, buoy SL-01;
* weather station MET-01.

The work is done by the ``scenario`` package next to this script (see its
docstring and README.md next to this file); this script is its command line.

Usage::

    python sample_feeds/generate.py --seed 20260501 [--out sample_feeds] [--plot season.png]

numpy and pandas only (matplotlib only for the optional ``--plot``).
"""
from __future__ import annotations

import argparse
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
if str(HERE) not in sys.path:   # `python sample_feeds/generate.py` already puts HERE first
    sys.path.insert(0, str(HERE))

from scenario import generate  # after HERE is on sys.path


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seed", type=int, default=20260501)
    parser.add_argument("--out", type=Path, default=HERE)
    parser.add_argument("--plot", type=Path, default=None, help="write a PNG overview (needs matplotlib)")
    args = parser.parse_args(argv)
    print(generate(args.seed, args.out, args.plot))


if __name__ == "__main__":
    main()
