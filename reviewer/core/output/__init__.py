"""Stage 4, the output: the cleaned table, the audit log and the report, written atomically.

export (the entry: export_set writes the whole set, manifest last), cleaned (checks and
one writer per format), delimited (CSV/TSV rebuilt from the source bytes), tables (Parquet
and Excel), audit (CSV for people, JSON Lines for programs), report and figures (the HTML
summary), manifest (which files one export wrote), atomic (all-or-nothing writes).
"""
