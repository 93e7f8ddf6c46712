"""The corpus stage: run a whole labelled evaluation set through the model.

Reading the set (``dataset``), length-sorted batches (``batching``), running
statistics (``streaming``), head importance (``importance``), head redundancy
(``redundancy``), the pruning simulation (``pruning``), the run's settings
(``settings``), the run itself (``run.run_corpus``) and its report files
(``report``). May import the checkpoint and measures stages and, for the report's
figures, ``inspector.figures``; never the command line.
"""

from __future__ import annotations


def __getattr__(name: str):
    if name in ("run_corpus", "CorpusReport", "CorpusCancelled"):
        from inspector.corpus import run

        return getattr(run, name)
    raise AttributeError(name)
