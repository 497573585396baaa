"""Batches of many files: settings, discovery, store, back-ends, runner, export."""
