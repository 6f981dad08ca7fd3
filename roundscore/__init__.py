"""roundscore: score interlaboratory proficiency-testing rounds.

The public API: load a round, read its results, evaluate, write outputs.

>>> from roundscore import load_round, read_results, evaluate   # doctest: +SKIP
>>> rnd = load_round("rounds/skw-2026-14")                      # doctest: +SKIP
>>> ev = evaluate(rnd, read_results(rnd))                       # doctest: +SKIP
"""

from __future__ import annotations

#: The package version: the one place it is written (pyproject.toml reads it, [tool.setuptools.dynamic]).
__version__ = "0.1.0"

from roundscore.errors import InputError, Problem, RoundFileError, RoundscoreError, StatisticsError
from roundscore.intake.readers import read_participants, read_results
from roundscore.intake.roundfile import load_round
from roundscore.model.evaluation import RoundEvaluation
from roundscore.model.round import Round
from roundscore.pipeline import evaluate, load_and_evaluate, run_round
from roundscore.stats.robust import RobustEstimate, algorithm_a, made, niqr
from roundscore.stats.scores import en_score, signal, z_prime_score, z_score, zeta_score
from roundscore.stats.sigma import horwitz_thompson, sigma_from_precision
from roundscore.stats.precision import algorithm_s, precision
from roundscore.stats.outliers import cochran, grubbs_double, grubbs_single, precision_with_screening, screen
from roundscore.stats.compare import compare_groups, compare_one, compare_two
from roundscore.stats.exact import centred
from roundscore.stats.items import homogeneity, stability
from roundscore.history.store import add_files, lab_history, store_round
from roundscore.history.rules import check_history

__all__ = [
    "__version__",
    "RoundscoreError", "InputError", "RoundFileError", "StatisticsError", "Problem",
    "Round", "load_round", "read_results", "read_participants",
    "evaluate", "RoundEvaluation", "load_and_evaluate", "run_round",
    "RobustEstimate", "algorithm_a", "made", "niqr",
    "z_score", "z_prime_score", "zeta_score", "en_score", "signal",
    "horwitz_thompson", "sigma_from_precision",
    "precision", "algorithm_s", "cochran", "grubbs_single", "grubbs_double", "screen", "precision_with_screening",
    "compare_two", "compare_one", "compare_groups", "centred", "homogeneity", "stability",
    "store_round", "add_files", "lab_history", "check_history",
]
