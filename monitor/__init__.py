"""Bloomline monitor package."""
