"""Formulas with their sources (formulas.py), re-exported here."""

from returngap.physics.formulas import *  # noqa: F403
