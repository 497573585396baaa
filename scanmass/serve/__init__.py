"""The bench page: ``scanmass serve``, measuring photos uploaded from a phone over the local network.

The room sits above :mod:`scanmass.batch` (its history is a batch database) and below the
command line. Modules: :mod:`.config` (settings, access token, addresses), :mod:`.upload`
(streaming upload with limits, file type by content), :mod:`.store` (jobs and history in
the batch's SQLite format), :mod:`.tasks` (what the worker processes run: the same
library calls as ``scanmass measure`` and ``scanmass export``), :mod:`.queue` (bounded job
queue over worker processes), :mod:`.app` (the web application) and :mod:`.run` (uvicorn).
Nothing here is imported by ``scanmass --help``.
"""
