"""The shared survey archive on PostgreSQL/PostGIS: push, pull, list and the history of a site.

psycopg 3 is an optional dependency (``mapper[archive]``); it is imported only when an archive
function connects, so everything else works without it. See ``docs/archive.md``.
"""
