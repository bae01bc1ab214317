"""Bloomline web package."""
