"""The life of a test: statuses, who may move it, and the rules (pure; no I/O)."""
