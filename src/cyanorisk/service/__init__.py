"""The scheduled service: the daily job, its scheduler and the embedded store."""
