"""Corpus runs: sweep many files, then choose one passband for the whole library.

Every file is swept exactly as ``audiobw sweep`` sweeps it (through
:func:`audiobw.jobs.sweep_file`), its sweep.json written under
``OUT/files/<name>/``.  The corpus summary then takes, for every case, the
share of files on which the case passes, and picks the narrowest case that
passes on at least the requested coverage with the same rule as
:func:`audiobw.choice.choose` (narrowest −3 dB bandwidth, then lower ENBW,
then lower order).

Case identity across files is ``(response, family, order, design_low_hz,
design_high_hz)``.  The grid is built per file (``Settings.grid_for`` with
the file's Nyquist frequency) and validated at the file's rate, so files
at different rates share a case only when the grid was given explicitly; a
case missing from a file's grid counts as not passing on that file.  A file
whose grid is invalid at its rate (an edge too close to its Nyquist
frequency) or which cannot be read is listed under ``failed`` with its
reason, and does not count in the shares (they are over the files swept).

Work is done by a local process pool (spawn context) or, with a cluster
address, by an existing dask.distributed cluster.  Tasks carry plain data
(paths and an option mapping) and return small mappings.  Each finished
file leaves one JSON file in ``OUT/cache/`` keyed by the file's SHA-256 and
the options' hash, so an interrupted run resumes with only the missing work.

The package follows the run: :mod:`~audiobw.corpus.inputs` (walking and
refusing inputs), :mod:`~audiobw.corpus.plain` (settings as plain data, the
options' hash), :mod:`~audiobw.corpus.cache` (the batch result cache),
:mod:`~audiobw.corpus.task` (one file on a worker),
:mod:`~audiobw.corpus.runners` (local pool and dask executors),
:mod:`~audiobw.corpus.summary` (corpus.json and corpus.csv),
:mod:`~audiobw.corpus.text` (terminal text) and :mod:`~audiobw.corpus.run`
(the entry point :func:`~audiobw.corpus.run.run_batch`).
"""
