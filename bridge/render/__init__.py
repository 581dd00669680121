"""Stage 7: pure renderings of a reconciliation (no statistics here)."""
