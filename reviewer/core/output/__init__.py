"""Stage 4, the output: the cleaned table, the audit log and the report, written atomically."""
