"""Margin Reviewer: rank rows of a labelled table by soft-margin slack and review them."""

__version__ = "0.1.0"
