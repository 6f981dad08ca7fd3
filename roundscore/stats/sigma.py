"""Sources of the standard deviation for proficiency assessment, σ_pt.

References
----------
.. [1] W. Horwitz, "Evaluation of analytical methods used for regulation of
   foods and drugs", Anal. Chem. 54 (1982) 67A; Horwitz, Kamps, Boyer,
   J. Assoc. Off. Anal. Chem. 63 (1980) 1344.
.. [2] M. Thompson, "Recent trends in inter-laboratory precision at ppb and
   sub-ppb concentrations in relation to fitness for purpose criteria in
   proficiency testing", Analyst 125 (2000) 385-386.
.. [3] Analytical Methods Committee, AMC Technical Brief No. 17 (2004),
   "The amazing Horwitz function".
.. [4] ISO 13528:2022 §8.4 (σ_pt from a precision experiment).
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "horwitz_thompson",
    "sigma_from_precision",
    "HORWITZ_LOW",
    "HORWITZ_HIGH",
]

#: Below this mass fraction Thompson (2000) replaces Horwitz by σ = 0.22 c.
HORWITZ_LOW = 1.2e-7
#: Above this mass fraction Thompson (2000) uses σ = 0.01 c^0.5.
HORWITZ_HIGH = 0.138


def horwitz_thompson(c: float | np.ndarray) -> float | np.ndarray:
    """Predicted reproducibility SD for a mass fraction ``c`` (both dimensionless).

    σ_H = 0.22 c                    for c < 1.2×10⁻⁷
    σ_H = 0.02 c^0.8495             for 1.2×10⁻⁷ ≤ c ≤ 0.138
    σ_H = 0.01 c^0.5                for c > 0.138

    Parameters
    ----------
    c : float or array
        Mass fraction (1 mg/kg = 1e-6); must be > 0.

    Examples
    --------
    >>> round(float(horwitz_thompson(1e-6)) / 1e-6, 3)   # 16 % RSD at 1 mg/kg
    0.16
    """
    c = np.asarray(c, dtype=float)
    if np.any(~(c > 0)):
        raise ValueError("the Horwitz function needs a mass fraction > 0")
    out = np.where(
        c < HORWITZ_LOW, 0.22 * c, np.where(c > HORWITZ_HIGH, 0.01 * np.sqrt(c), 0.02 * c**0.8495)
    )
    return float(out) if out.ndim == 0 else out


def sigma_from_precision(s_R: float, s_r: float, replicates: int) -> float:
    """σ_pt = √(s_R² − s_r²(1 − 1/n)) for the mean of n replicates (ISO 13528 §8.4).

    A lab's mean of n replicates has a variance s_L² + s_r²/n =
    s_R² − s_r²(1 − 1/n) when the precision experiment reported s_R and s_r
    for single results.
    """
    var = s_R**2 - s_r**2 * (1.0 - 1.0 / replicates)
    if not var > 0:
        raise ValueError("s_R² − s_r²(1 − 1/n) must be > 0")
    return float(np.sqrt(var))
