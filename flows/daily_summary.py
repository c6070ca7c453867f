"""What a daily run did: the summary the flow returns and the tables it publishes."""

from __future__ import annotations

from dataclasses import asdict, dataclass, field
from pathlib import Path

from warehouse.loads import LoadOutcome

__all__ = ["COMPLETED", "COMPLETED_WITH_FINDINGS", "DailySummary", "curve_rows", "file_record", "summarise"]

COMPLETED = "completed"
COMPLETED_WITH_FINDINGS = "completed with findings"


@dataclass
class DailySummary:
    """What one daily run did. ``status``: "completed" or "completed with findings".

    ``findings`` counts the findings raised during the run by severity (load-time and curve-level);
    ``seconds`` the wall time of each step; ``work_seconds`` the whole flow body (Prefect's own
    start-up excluded); ``modelled`` the curves whose term-structure estimate was refreshed (a month
    had closed since the last one); ``compared`` the curves whose contender comparison was recomputed.
    """

    status: str = COMPLETED
    files: list[dict] = field(default_factory=list)
    still_changing: list[str] = field(default_factory=list)
    curves: dict[str, dict] = field(default_factory=dict)
    findings: dict[str, int] = field(default_factory=dict)
    seconds: dict[str, float] = field(default_factory=dict)
    work_seconds: float = 0.0
    modelled: list[str] = field(default_factory=list)  # curves whose month-end model estimate was refreshed
    compared: list[str] = field(default_factory=list)  # curves whose contender comparison was recomputed

    def _count(self, status: str) -> int:
        return sum(1 for f in self.files if f["status"] == status)

    @property
    def files_loaded(self) -> int:
        return self._count("loaded")

    @property
    def files_refused(self) -> int:
        return self._count("refused")

    @property
    def files_already_loaded(self) -> int:
        return self._count("already loaded")

    @property
    def rows_accepted(self) -> int:
        return sum(f["rows_accepted"] for f in self.files)

    @property
    def rows_rejected(self) -> int:
        return sum(f["rows_rejected"] for f in self.files)

    @property
    def new_findings(self) -> int:
        return sum(self.findings.values())

    @property
    def forwards_built(self) -> int:
        return sum(c.get("forwards_built", 0) for c in self.curves.values())

    @property
    def outcomes_realized(self) -> int:
        return sum(c.get("outcomes_realized", 0) for c in self.curves.values())

    def as_dict(self) -> dict:
        out = asdict(self)
        for name in ("files_loaded", "files_refused", "files_already_loaded", "rows_accepted", "rows_rejected",
                     "new_findings", "forwards_built", "outcomes_realized"):
            out[name] = getattr(self, name)
        return out


def file_record(o: LoadOutcome, moved_to: str | None) -> dict:
    def day(x: object) -> str | None:
        return None if x is None else str(x)[:10]

    return {"file": Path(o.source_file).name, "status": o.status, "curves": ",".join(o.curves),
            "rows_read": o.rows_read, "rows_accepted": o.rows_accepted, "rows_revised": o.rows_revised,
            "rows_rejected": o.rows_rejected, "first_day": day(o.first_day), "last_day": day(o.last_day),
            "detail": o.detail or "", "moved_to": moved_to or ""}


def curve_rows(summary: DailySummary) -> list[dict]:
    """The ``afterward-daily`` table: one row per curve and a total row (JSON-ready: no dates)."""
    rows = []
    keys = ("files_loaded", "rows_accepted", "rows_rejected", "new_findings", "days_built", "forwards_built",
            "outcomes_realized")
    for name, c in summary.curves.items():
        rows.append({"curve": name, **{k: int(c.get(k, 0)) for k in keys},
                     "first_new_day": c.get("first_new_day") or "", "last_new_day": c.get("last_new_day") or ""})
    total = {"curve": "all", **{k: sum(r[k] for r in rows) for k in keys}}
    # files refused have no curve, but the total must count their rows
    total["files_loaded"] = summary.files_loaded
    total["rows_accepted"] = summary.rows_accepted
    total["rows_rejected"] = summary.rows_rejected
    total["new_findings"] = summary.new_findings
    total["first_new_day"] = min((r["first_new_day"] for r in rows if r["first_new_day"]), default="")
    total["last_new_day"] = max((r["last_new_day"] for r in rows if r["last_new_day"]), default="")
    rows.append(total)
    return rows


def summarise(summary: DailySummary, cfg_curves: list[str], checks, built, realized, audited: list[str],  # noqa: ANN001
              found: dict[tuple[str, str], int]) -> None:
    """Fill ``summary``'s per-curve counts, findings by severity and status from the steps' summaries
    (``found``: findings raised during the run by (curve, severity))."""
    for name in cfg_curves:
        mine = [f for f in summary.files if name in f["curves"].split(",")]
        b = built.curves.get(name, {})
        summary.curves[name] = {
            "files_loaded": sum(1 for f in mine if f["status"] == "loaded"),
            "rows_accepted": sum(f["rows_accepted"] for f in mine),
            "rows_rejected": sum(f["rows_rejected"] for f in mine),
            "new_findings": sum(n for (c, _), n in found.items() if c == name),
            "days_checked": checks.curves.get(name, {}).get("days_checked", 0),
            "days_built": b.get("days_built", 0),
            "days_held": b.get("held", 0),
            "forwards_built": b.get("forwards", 0),
            "outcomes_realized": realized.curves.get(name, {}).get("realized", 0),
            "pending_forwards": realized.curves.get(name, {}).get("pending", 0),
            "audited": name in audited,
            "first_new_day": min((f["first_day"] for f in mine if f["first_day"]), default=None),
            "last_new_day": max((f["last_day"] for f in mine if f["last_day"]), default=None),
        }
    for (_, severity), n in found.items():
        summary.findings[severity] = summary.findings.get(severity, 0) + n
    serious = summary.findings.get("reject", 0) + summary.findings.get("warn", 0)
    if summary.files_refused or summary.rows_rejected or serious:
        summary.status = COMPLETED_WITH_FINDINGS
