"""Background work: report renders run by a worker process, never in a web request.

``render.py`` is the task code (the same on every backend), ``limits.py`` runs one render in a
child process with a time and memory limit, ``queue.py`` hands a render to procrastinate on
PostgreSQL (whose workers share the queue), and ``worker.py`` runs a worker: its heartbeat, the
giving-up of renders whose worker died, and on SQLite the polling of the render table
(``claybench serve`` starts one).
"""
