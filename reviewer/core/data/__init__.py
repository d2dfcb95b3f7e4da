"""Stage 1, the data: read a file, decide each column's role, turn the table into features."""
