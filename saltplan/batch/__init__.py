"""Batch: many structures through the plan, from CSV, SDF or a DataFrame (input sources),
on local processes or Dask (engines), to streamed tables and a summary.

Imports ``plan``, ``ionization``, ``library``, ``structure``, ``reports`` (the summary
page) and the private helpers.
"""
from __future__ import annotations

from .run import COLUMNS, BatchRun, evaluate_many, iter_evaluate, run_batch, summarize_plan

__all__ = ["COLUMNS", "BatchRun", "evaluate_many", "iter_evaluate", "run_batch",
           "summarize_plan"]
