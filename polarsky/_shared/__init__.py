"""Helpers shared by every layer: strict value checks and the method registry type."""
