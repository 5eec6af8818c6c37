"""Local web screens (setup, review, operator) on a small standard-library server."""
