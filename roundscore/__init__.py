"""roundscore: score interlaboratory proficiency-testing rounds.

The public API: load a round, read its results, evaluate, write outputs.

>>> from roundscore import load_round, read_results, evaluate   # doctest: +SKIP
>>> rnd = load_round("rounds/skw-2026-14")                      # doctest: +SKIP
>>> ev = evaluate(rnd, read_results(rnd))                       # doctest: +SKIP
"""

from __future__ import annotations

#: The package version: the one place it is written (pyproject.toml reads it, [tool.setuptools.dynamic]).
__version__ = "0.1.0"

from typing import TYPE_CHECKING

if TYPE_CHECKING:  # the names below, for type checkers; at run time each is imported when first used
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

#: Each public name and the module it comes from. Importing the package imports none of them: a command that
#: needs few (``roundscore check``) does not load scipy.stats, the writers or the archive for nothing.
_PUBLIC: dict[str, str] = {
    "InputError": "roundscore.errors",
    "Problem": "roundscore.errors",
    "RoundFileError": "roundscore.errors",
    "RoundscoreError": "roundscore.errors",
    "StatisticsError": "roundscore.errors",
    "read_participants": "roundscore.intake.readers",
    "read_results": "roundscore.intake.readers",
    "load_round": "roundscore.intake.roundfile",
    "RoundEvaluation": "roundscore.model.evaluation",
    "Round": "roundscore.model.round",
    "evaluate": "roundscore.pipeline",
    "load_and_evaluate": "roundscore.pipeline",
    "run_round": "roundscore.pipeline",
    "RobustEstimate": "roundscore.stats.robust",
    "algorithm_a": "roundscore.stats.robust",
    "made": "roundscore.stats.robust",
    "niqr": "roundscore.stats.robust",
    "en_score": "roundscore.stats.scores",
    "signal": "roundscore.stats.scores",
    "z_prime_score": "roundscore.stats.scores",
    "z_score": "roundscore.stats.scores",
    "zeta_score": "roundscore.stats.scores",
    "horwitz_thompson": "roundscore.stats.sigma",
    "sigma_from_precision": "roundscore.stats.sigma",
    "algorithm_s": "roundscore.stats.precision",
    "precision": "roundscore.stats.precision",
    "cochran": "roundscore.stats.outliers",
    "grubbs_double": "roundscore.stats.outliers",
    "grubbs_single": "roundscore.stats.outliers",
    "precision_with_screening": "roundscore.stats.outliers",
    "screen": "roundscore.stats.outliers",
    "compare_groups": "roundscore.stats.compare",
    "compare_one": "roundscore.stats.compare",
    "compare_two": "roundscore.stats.compare",
    "centred": "roundscore.stats.exact",
    "homogeneity": "roundscore.stats.items",
    "stability": "roundscore.stats.items",
    "add_files": "roundscore.history.store",
    "lab_history": "roundscore.history.store",
    "store_round": "roundscore.history.store",
    "check_history": "roundscore.history.rules",
}


def __getattr__(name: str):
    """A public name, imported from its module on first use (PEP 562)."""
    module = _PUBLIC.get(name)
    if module is None:
        raise AttributeError(f"module 'roundscore' has no attribute {name!r}")
    import importlib

    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_PUBLIC))


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
