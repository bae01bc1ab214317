"""QC flag values after the U.S. IOOS *Manual for Real-Time Oceanographic Data Quality Control Flags* (2020).

1 pass, 2 not evaluated, 3 suspect, 4 fail, 9 missing.
"""

from __future__ import annotations

PASS, NOT_EVALUATED, SUSPECT, FAIL, MISSING = 1, 2, 3, 4, 9
