"""The plant database: every station's step log forwarded to one PostgreSQL server, folded into
the same units, steps and alarms tables as a station's own log, and reviewed across stations.

Needs the ``plant`` extra (psycopg 3): ``pip install 'stationcheck[plant]'``.
"""
