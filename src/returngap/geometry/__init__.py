"""Geometry helpers: aperture shapes, cuts through gaps, grid paths."""
