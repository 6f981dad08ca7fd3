"""Stages of the evaluation beyond the scores: item checks, precision and method groups."""
