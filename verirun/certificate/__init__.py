"""Certificates rendered from run records alone."""
