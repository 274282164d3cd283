"""The dask engine: every check of a run on a Dask cluster, with the pandas engine's results.

``engine: dask`` in the config, ``--engine dask`` / ``--scheduler ADDRESS`` on the command line,
or ``run_checks(config, engine="dask")`` send a run here (docs/engines.md). The series are split
into shards (every row of a series in one shard: a hash of its keys), each shard is checked on
a worker into small mergeable partials, and the client merges and finishes them into the same
:class:`~accuracy_checks.results.CheckResult` s, through the same judge, wording and examples.
The modules, in the order a run uses them: :mod:`.cluster`, :mod:`.read`, :mod:`.plan`,
:mod:`.shards`, :mod:`.rows`, :mod:`.coverage`, :mod:`.accuracy` (and its ``accuracy_*``
modules; :mod:`.accuracy_stage`), :mod:`.snapshot`, :mod:`.merge`, :mod:`.run`;
:mod:`.client_read` for inputs read on the client. Nothing here is imported by
``import accuracy_checks``; Dask itself is imported only when a run uses the engine.
"""
