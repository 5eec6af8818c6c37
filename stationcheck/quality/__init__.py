"""The quality engineer's view of the step log: statistics (Wilson intervals, EWMA and CUSUM
charts, Western Electric run rules), station figures and trends computed in SQL over a read-only
log, CSV/JSON export and a standalone HTML report."""
