"""The afterward archive from Python: ``afterward.open()`` returns a read-only handle on a store.

    >>> import afterward
    >>> archive = afterward.open("afterward-demo/afterward.toml")
    >>> seen = archive.outcomes("govt", start="1Y", tenor="1Y")     # a pandas DataFrame
    >>> curve = archive.curve("govt", "2024-06-28")                 # that day's official curve
    >>> curve.forward_rate("2025-07-01", "2026-07-01", "semiannual")

The handle holds no connection between calls (each call opens the store read-only and closes it),
so it never blocks ``afterward run`` for longer than the call it is making. See
:class:`afterward.handle.Archive` for every method, and the README's "In a notebook".
"""

from __future__ import annotations

import os

from afterward.handle import Archive, _timestamp
from pipeline.config import find_config, load_config
from pipeline.errors import AfterwardError, KnownAtError
from warehouse.as_known_at import first_known
from warehouse.connect import reader
from warehouse.loads import utc_now

__all__ = ["AfterwardError", "Archive", "open"]


def open(config: str | os.PathLike[str] | None = None, as_known_at: object = None) -> Archive:  # noqa: A001
    """A read-only handle on the store of ``config``.

    ``config``: a path to ``afterward.toml``; by default the command line's discovery
    (``$AFTERWARD_CONFIG``, else ``./afterward.toml``). ``as_known_at``: an ISO 8601 timestamp or a
    ``datetime`` (without a zone: UTC) to see the archive as it stood then; so far only
    :meth:`Archive.quotes` answers it. A time before the store's first known load (its
    ``known_since``, else its start) or in the future is refused (:class:`KnownAtError`).

    The store is opened once here, read-only, to check it is an afterward store, and closed again.
    Every mistake raises a subclass of :class:`AfterwardError` with a one-line message.
    """
    cfg = load_config(find_config(config))
    known = _timestamp(as_known_at)
    with reader(cfg.store_path) as con:
        first = first_known(con)
    if known is not None:
        now = utc_now()
        if known > now:
            raise KnownAtError(f"as_known_at {known.isoformat()} UTC is in the future "
                                f"(now {now:%Y-%m-%dT%H:%M:%S} UTC)")
        if first is None or known < first:
            since = "nothing was ever loaded" if first is None else f"the first load's data: {first.isoformat()} UTC"
            raise KnownAtError(f"as_known_at {known.isoformat()} UTC is before the archive existed ({since})")
    return Archive(cfg, known)
