"""Corpus runs, by their former module path: the names now live in :mod:`audiobw.corpus`.

Kept so ``audiobw.batch.run_batch`` and the other public names used by tests,
benchmarks and notebooks keep working; new code imports from the package.
"""

from .corpus.cache import (
    CACHE_FORMAT,
    DATA_KEYS,
    IDENTITY_KEYS,
    MEDIAN_KEYS,
    cache_entry_valid,
    entry_checksum,
    read_cache,
)
from .corpus.inputs import Inputs, Item, collect_inputs, parse_coverage
from .corpus.plain import options_hash, settings_from_plain, settings_to_plain
from .corpus.run import BatchResult, run_batch
from .corpus.runners import BatchInterrupted
from .corpus.summary import CSV_KEYS, PERCENTILES, csv_text, summarise
from .corpus.task import exit_with_parent, sweep_task, worker_init
from .corpus.text import summary_lines

__all__ = [
    "CACHE_FORMAT",
    "CSV_KEYS",
    "DATA_KEYS",
    "IDENTITY_KEYS",
    "MEDIAN_KEYS",
    "PERCENTILES",
    "BatchInterrupted",
    "BatchResult",
    "Inputs",
    "Item",
    "cache_entry_valid",
    "collect_inputs",
    "csv_text",
    "entry_checksum",
    "exit_with_parent",
    "options_hash",
    "parse_coverage",
    "read_cache",
    "run_batch",
    "settings_from_plain",
    "settings_to_plain",
    "summarise",
    "summary_lines",
    "sweep_task",
    "worker_init",
]
