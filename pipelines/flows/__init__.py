"""Prefect flows and tasks of downcore (thin: each task calls one stage function).

- :mod:`~pipelines.flows.plan` -- the run plan read from the config at the edge;
- :mod:`~pipelines.flows.keys` -- content-hash cache keys (inputs, settings, science code);
- :mod:`~pipelines.flows.store` -- the content-addressed work store (finished stage results);
- :mod:`~pipelines.flows.stages` -- stage runners (plain Python, called by the tasks);
- :mod:`~pipelines.flows.tasks` -- the Prefect tasks;
- :mod:`~pipelines.flows.archive` -- the archive flow and the per-core flow;
- :mod:`~pipelines.flows.runners` -- threads or Dask, and Prefect environment defaults;
- :mod:`~pipelines.flows.run` -- :func:`execute_run`, one whole run into a run folder.

Import the sub-modules directly; this package imports nothing heavy on its own.
"""
