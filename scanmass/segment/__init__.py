"""The segment stage: parts and holes as sub-pixel rings in pixel space."""
