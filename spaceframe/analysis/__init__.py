"""Analyses over a Model: one module per kind (static, stability)."""
