"""Tabulate the double Grubbs critical values for p = 4 ... 40 (the range of ISO 5725-2 Table 5).

Writes ``roundscore/stats/grubbs_double_values.py``: for each p, the lower critical values at 5 % and 1 %
and their Monte Carlo standard errors, from ``grubbs_double_table(p, draws=DRAWS)`` (seeded, so the file is
reproducible). Run once when the simulation changes:

    python scripts/tabulate_grubbs_double.py            # about 20 minutes on one core

The run-time simulation (2**18 to 2**21 draws) has a standard error near 2e-4, which can differ from the
table's fourth decimal; these values, from 2**25 draws, have standard errors near 5e-5.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

from roundscore.stats.grubbs_double import GRUBBS_DOUBLE_SEED, grubbs_double_table

DRAWS = 1 << 25
P_RANGE = range(4, 41)
OUT = Path(__file__).resolve().parents[1] / "roundscore" / "stats" / "grubbs_double_values.py"


def main() -> int:
    rows = []
    for p in P_RANGE:
        t0 = time.perf_counter()
        t = grubbs_double_table(p, draws=DRAWS)
        rows.append(f"    {p}: ({t.critical_5!r}, {t.critical_1!r}, {t.se_5!r}, {t.se_1!r}),")
        print(f"p={p}: 5% {t.critical_5:.5f} ± {t.se_5:.1e}, 1% {t.critical_1:.5f} ± {t.se_1:.1e} "
              f"({time.perf_counter() - t0:.0f} s)", flush=True)
    OUT.write_text(
        '"""Double Grubbs critical values tabulated by scripts/tabulate_grubbs_double.py (do not edit by hand).\n\n'
        f"p → (5 % critical value, 1 % critical value, their Monte Carlo standard errors), from {DRAWS} seeded\n"
        f"samples per p (seed {GRUBBS_DOUBLE_SEED}, ``numpy.random.default_rng([seed, p])``).\n"
        '"""\n\n'
        f"DRAWS = {DRAWS}\n"
        f"SEED = {GRUBBS_DOUBLE_SEED}\n\n"
        "TABLE: dict[int, tuple[float, float, float, float]] = {\n" + "\n".join(rows) + "\n}\n",
        encoding="utf-8")
    print(f"wrote {OUT}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
