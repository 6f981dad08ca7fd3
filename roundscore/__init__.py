"""roundscore: score interlaboratory proficiency-testing rounds.

The public API: load a round, read its results, evaluate, write outputs.

>>> from roundscore import load_round, read_results, evaluate   # doctest: +SKIP
>>> rnd = load_round("rounds/skw-2026-14")                      # doctest: +SKIP
>>> ev = evaluate(rnd, read_results(rnd))                       # doctest: +SKIP
"""

from __future__ import annotations

__version__ = "0.1.0"

from .errors import InputError, Problem, RoundFileError, RoundscoreError, StatisticsError
from .evaluate import RoundEvaluation, evaluate
from .io.readers import read_participants, read_results
from .pipeline import load_and_evaluate, run_round
from .round import Round, load_round
from .stats.robust import RobustEstimate, algorithm_a, made, niqr
from .stats.scores import en_score, signal, z_prime_score, z_score, zeta_score
from .stats.sigma import horwitz_thompson, sigma_from_precision

__all__ = [
    "__version__",
    "RoundscoreError", "InputError", "RoundFileError", "StatisticsError", "Problem",
    "Round", "load_round", "read_results", "read_participants",
    "evaluate", "RoundEvaluation", "load_and_evaluate", "run_round",
    "RobustEstimate", "algorithm_a", "made", "niqr",
    "z_score", "z_prime_score", "zeta_score", "en_score", "signal",
    "horwitz_thompson", "sigma_from_precision",
]
