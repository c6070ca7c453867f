"""As known at: every derived figure recomputed from the archive as it stood at a past time.

``--as-known-at TS`` on ``audit``, ``compare``, ``report`` and ``sql`` runs here: the official store's
state at ``TS`` (loads known by then, their quote versions, findings and acceptances as they stood,
forecast files loaded by then: :mod:`warehouse.as_known_at`) is copied into a scratch store in a
temporary folder, and the ordinary steps rebuild, realise and audit it (and, for ``compare``, the
model when one had been estimated by then, and the comparison). Only observations known at ``TS``
realise a forward. Nothing official is written; the scratch store is deleted when the command ends.

The result equals what the official commands printed at ``TS`` when the same program version made
both; :func:`known_at` says in one line when the audit stored at ``TS`` came from another version.
Left out: what-if builds (scenarios are not versioned) and the inversion episodes the checks derive.
"""

from __future__ import annotations

import dataclasses
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path

from pipeline.config import Config
from pipeline.errors import KnownAtError
from warehouse.as_known_at import copy_known_at, first_known
from warehouse.audit import audit_version_at
from warehouse.connect import reader, writer

__all__ = ["KnownAt", "known_at", "known_at_store", "parse_known_at"]




@dataclass
class KnownAt:
    """The scratch store of one as-known-at computation: ``cfg`` points at it; ``notes`` are the
    one-line remarks the command prints (the scratch, a program-version difference)."""

    cfg: Config
    ts: datetime
    notes: list[str] = field(default_factory=list)
    copied: dict[str, int] = field(default_factory=dict)


def parse_known_at(value: str, option: str, *, now: datetime | None = None) -> datetime:
    """An ISO 8601 time as naive UTC (without a zone it is UTC); refused when malformed or in the future."""
    try:
        ts = datetime.fromisoformat(value.strip())
    except ValueError:
        raise KnownAtError(f"{option} {value!r} is not an ISO 8601 time (e.g. 2031-03-31T18:00:00Z)") from None
    if ts.tzinfo is not None:
        ts = ts.astimezone(UTC).replace(tzinfo=None)
    current = (now or datetime.now(UTC)).replace(tzinfo=None)
    if ts > current:
        raise KnownAtError(f"{option} {ts.isoformat(sep=' ')} UTC is in the future "
                           f"(now {current:%Y-%m-%d %H:%M:%S} UTC)")
    return ts


def _code_version() -> str:
    from flows.build_step import code_version

    return code_version()


def _bring_schema_up_to_date(cfg: Config) -> None:
    """A store last opened by an older version lacks the columns the copy reads (``known_since``...):
    open it once as the writer, which applies the missing migrations, as any writing command would."""
    from warehouse.schema import SCHEMA_FILES, schema_version

    with reader(cfg.store_path) as con:
        behind = schema_version(con) < max(v for v, _ in SCHEMA_FILES())
    if behind:
        with writer(cfg.store_path):
            pass


@contextmanager
def known_at(cfg: Config, ts: datetime, *, audit: bool = True, model: bool = False,
             compare: bool = False) -> Iterator[KnownAt]:
    """A scratch store holding the archive as known at ``ts`` (naive UTC), rebuilt and realised; with
    ``audit`` audited, with ``model`` modelled (when a model had been estimated by ``ts``), with
    ``compare`` compared; deleted on exit. Commands that take a window run their own step on
    ``KnownAt.cfg`` instead (``audit=False``)."""
    with tempfile.TemporaryDirectory(prefix="afterward-known-at-") as tmp:
        yield known_at_store(cfg, ts, Path(tmp), audit=audit, model=model, compare=compare)


def known_at_store(cfg: Config, ts: datetime, folder: Path, *, audit: bool = True, model: bool = False,
                   compare: bool = False) -> KnownAt:
    """:func:`known_at`'s scratch store, made in ``folder`` (an empty folder the caller removes)."""
    from flows.audit_step import run_audit
    from flows.build_step import run_build
    from flows.realize_step import run_realize

    _bring_schema_up_to_date(cfg)
    with reader(cfg.store_path) as con:
        first = first_known(con)
        version_then = audit_version_at(con, ts)
        modelled = con.execute("SELECT count(*) FROM model_estimate WHERE computed_at <= ?", [ts]).fetchall()[0][0]
    if first is None:
        raise KnownAtError("--as-known-at: the store holds no load yet")
    if ts < first:
        raise KnownAtError(f"--as-known-at {ts.isoformat(sep=' ')} UTC is before the first load "
                           f"({first:%Y-%m-%d %H:%M:%S} UTC)")
    scratch = dataclasses.replace(cfg, store_path=Path(folder) / "as-known-at.duckdb")
    out = KnownAt(scratch, ts, [f"as known at {ts.isoformat(sep=' ')} UTC: recomputed on a scratch copy; "
                                "the store is unchanged"])
    now_version = _code_version()
    if version_then is not None and version_then != now_version:
        out.notes.append(f"the audit stored at that time was computed by {version_then}; this is {now_version}, "
                         "so figures may differ")
    with writer(scratch.store_path) as con:
        out.copied = copy_known_at(con, str(cfg.store_path), ts)
        run_build(scratch, con=con)
        run_realize(scratch, full=True, con=con)
        if audit:
            run_audit(scratch, con=con)
        if (model or compare) and modelled:
            from flows.model_step import run_model
            from pipeline.term_structure import ModelInputError

            try:
                run_model(scratch, con=con)
            except ModelInputError:  # too little known then for the model: model_expected is absent
                pass
        if compare:
            from flows.compare_step import run_compare

            run_compare(scratch, con=con)
    return out
