"""Procedures: validated models of what to verify, loaded from YAML, and the plan of a run."""
