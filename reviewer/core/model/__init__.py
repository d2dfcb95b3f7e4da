"""Stage 2, the model: soft-margin fits, their solvers, held-out values, tuning, one review fit."""
