"""The run engine, one concern per module, in the order a run uses them:

``inputs`` (open and check every input, the run grid) -> ``alignment`` (co-registration of the
surveys) -> ``plan`` (the picklable :class:`~peatburn.engine.plan.RunPlan`) -> ``depth_models``
(the water-table model fit) -> ``blocks`` (read and compute one block) -> ``executors`` (serial,
processes, dask) -> ``sums`` and ``zones`` (zone sums) -> ``above_ground`` (flaming) ->
``intervals`` (Monte Carlo) -> ``runner`` (the end-to-end run, :func:`peatburn.engine.runner.run`).
``calibrate`` is the ``peatburn calibrate`` command's library function.

Science lives in :mod:`peatburn.science`; this package reads files, orders the work and writes nothing
of its own science.
"""
