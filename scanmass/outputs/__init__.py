"""Outputs: atomic writes, result reading, overlay, DXF/SVG export, HTML report."""
