"""Batch runs: every case folder under a folder, solved locally in worker processes or on a
Dask cluster, with parameter sweeps, resumption and a summary table."""

from __future__ import annotations

from fieldenergy.batch._cluster import ClusterAddress
from fieldenergy.batch.discovery import find_cases, input_sha256
from fieldenergy.batch.errors import BatchError
from fieldenergy.batch.runner import run_batch
from fieldenergy.batch.summary import BatchRow, BatchSummary

__all__ = ["BatchError", "BatchRow", "BatchSummary", "ClusterAddress", "find_cases", "input_sha256", "run_batch"]
