"""The scale stage: pixel <-> mm maps of the measured plane (scan DPI, marker mat, paper sheet, lens)."""
