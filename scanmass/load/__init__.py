"""The load stage: decode image files, EXIF orientation, bit depth, DPI, tone curves."""
