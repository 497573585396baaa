"""The scale stage: pixel <-> mm maps of the measured plane (scan DPI, marker mat, paper sheet, lens).

``planemap``   the typed :class:`~scanmass.scale.planemap.PlaneMap` every source produces
``markers``    ArUco detection and corner refinement (a lens correction comes in as a function)
``edges``      sub-pixel straight edges shared by markers and the sheet
``homography`` robust fit, sampled covariance, camera geometry, raised faces
``camera``     focal length, sampled maps, thickness correction: :class:`~scanmass.scale.camera.PhotoScale`
``mat_scale``  a photo on a marker mat; ``sheet``: a photo on a plain paper sheet
``mat``        mat layouts and printing; ``lens``: lens profiles and their calibration

The stage returns a plane map (and, for photos, the clear area, the support points and
warnings); it never segments or measures: :mod:`scanmass.pipeline` orchestrates.
"""
