"""The board model, the settings and the findings: plain declared data."""
