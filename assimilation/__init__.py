"""Bloomline assimilation package."""
