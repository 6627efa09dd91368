"""Batch audits of many boards: the scheduler side and the per-board worker."""
