"""The invented demo scenarios: their data files, planted-error lists and generators."""

COFFEE_DEMO_ROLES = {"cupper_note": "ignore"}
"""Column kinds the coffee demo opens with: the cupper's tasting note is read beside the
numbers, not fitted (the window lists it under the columns the model does not use)."""
