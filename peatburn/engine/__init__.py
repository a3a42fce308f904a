"""The run engine: inputs on one grid, co-registration, the picklable plan, block work, executors,
zone sums, intervals and the end-to-end run (:func:`peatburn.engine.runner.run`).

Science lives in :mod:`peatburn.science`; this package reads files, orders the work and writes nothing
of its own science.
"""
