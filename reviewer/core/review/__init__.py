"""Stage 3, the review: the edit log, the session file, the session, comparison, queue rules."""
