"""From what a reader found to quote rows ready for the archive.

Assigns each row its curve, converts the file's units to decimals, rejects tenors the curve does not
know and duplicates, runs the row-level expectations, and computes each quote's maturity date.
Every row ends in exactly one of the two frames of an :class:`Intake`.

The row-level expectations run over many files at once (:func:`validate_intakes`): one validation
per curve for a whole batch of files costs little more than one for a single file.
"""

from __future__ import annotations

import fnmatch
import itertools
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from pipeline.config import Config, ConfigError, CurveConfig
from pipeline.dates import maturity_dates
from pipeline.readers import ReadResult, to_decimal
from pipeline.wording import SHOWN, first_items, more_text, number_text, units_name

__all__ = ["Intake", "REJECT_COLUMNS", "ROW_COLUMNS", "load_findings", "prepare_many", "prepare_quotes", "route_curve",
           "validate_intakes"]

REJECT_COLUMNS = ["line", "raw", "reason", "check_name"]
# ``value`` is the number as the file wrote it, in the file's units (``rate`` is its decimal): reasons quote it
ROW_COLUMNS = ["curve", "as_of", "tenor", "maturity_date", "rate", "value", "line", "raw"]

# rows of one curve (line, as_of, tenor, rate, value, raw) and its config -> (ok mask, reasons, checks, summary)
RowValidator = Callable[[pd.DataFrame, CurveConfig], tuple[np.ndarray, pd.Series, pd.Series, dict]]


@dataclass
class Intake:
    rows: pd.DataFrame            # ROW_COLUMNS
    rejected: pd.DataFrame        # REJECT_COLUMNS
    duplicates: pd.DataFrame      # curve, as_of, tenor, rows, detail: same key twice with different values
    validations: list[dict] = field(default_factory=list)


_EMPTY: dict[tuple[str, ...], pd.DataFrame] = {}


def _empty(columns: list[str]) -> pd.DataFrame:
    # building an empty frame costs about a millisecond; most files have no rejected rows
    key = tuple(columns)
    if key not in _EMPTY:
        _EMPTY[key] = pd.DataFrame({c: pd.Series([], dtype=object) for c in columns})
    return _EMPTY[key].copy()


def route_curve(cfg: Config, file_name: str, explicit: str | None = None) -> str | None:
    """The curve a file belongs to: ``explicit`` if given, else the curve whose ``files`` glob matches.

    ``None`` when no glob matches (a long-layout file may still name its curves in a column).
    Raises :class:`ConfigError` when the name matches several curves' globs.
    """
    if explicit is not None:
        cfg.curve(explicit)
        return explicit
    matches = [n for n, c in cfg.curves.items() if fnmatch.fnmatch(file_name, c.files)]
    if len(matches) > 1:
        raise ConfigError(f"{file_name} matches the files glob of several curves ({', '.join(matches)}); "
                          "use --curve")
    return matches[0] if matches else None


def _group_starts(frame: pd.DataFrame, key: list[str]) -> np.ndarray:
    """Group number of each row of ``frame``, already sorted by ``key``: a new group wherever a key changes."""
    n = len(frame)
    change = np.zeros(n, dtype=bool)
    if n:
        change[0] = True
    for k in key:
        col = frame[k].to_numpy()
        if n > 1:
            change[1:] |= col[1:] != col[:-1]
    return np.cumsum(change) - 1


def _duplicates(part: pd.DataFrame, name: str, units: str
                ) -> tuple[np.ndarray, list[pd.DataFrame], pd.DataFrame | None]:
    """Rows to drop for repeating a (day, tenor) of the same file, their rejections, and findings.

    Identical repeats keep the first line; conflicting values keep none of them, since neither can
    be trusted over the other. A conflict's reason and finding name at most
    :data:`~pipeline.wording.SHOWN` of the group's distinct values (as written, in the file's
    ``units``) with the first line of each, then count the other lines: a group of a million lines
    costs a reason no longer than a group of two, and the whole is linear in the rows.
    """
    key = ["file", "as_of", "tenor"]
    dup = part.duplicated(key, keep=False).to_numpy()
    drop = np.zeros(len(part), dtype=bool)
    if not dup.any():
        return drop, [], None
    # only the rows of duplicated keys from here on, each group's rows together and in line order
    d = part.loc[dup].assign(_pos=np.flatnonzero(dup)).sort_values([*key, "line"], kind="stable")
    gid = _group_starts(d, key)
    starts = np.flatnonzero(np.r_[True, gid[1:] != gid[:-1]])
    rate = d["rate"].to_numpy(dtype=float)
    spread = np.maximum.reduceat(rate, starts) - np.minimum.reduceat(rate, starts)
    conflict_g = spread > 1e-12
    line = d["line"].to_numpy()
    pos = d["_pos"].to_numpy()
    first_row = np.zeros(len(d), dtype=bool)
    first_row[starts] = True
    conflict = conflict_g[gid]
    repeat = ~conflict & ~first_row
    rejected = []
    finding = None
    if conflict.any():
        c = d.loc[conflict]
        cg = _group_starts(c, key)
        n_c = int(cg[-1]) + 1
        c_starts = np.flatnonzero(np.r_[True, cg[1:] != cg[:-1]])
        size = np.bincount(cg, minlength=n_c)
        # each distinct value once, at its first line: the values that disagree are what a reader needs
        distinct = ~pd.DataFrame({"g": cg, "v": c["value"].to_numpy(dtype=float)}).duplicated().to_numpy()
        items = (number_text(c["value"].to_numpy()[distinct]) + " on line "
                 + c["line"].to_numpy()[distinct].astype(str).astype(object))
        listed, n_distinct = first_items(cg[distinct], items, n_c)
        shown = np.minimum(n_distinct, SHOWN)
        more = more_text(size, shown, "lines")
        counted = np.array([f"{n:,}" for n in size.tolist()], dtype=object)
        tenor_g = c["tenor"].to_numpy(dtype=object)[c_starts]
        said = f"conflicting values ({units_name(units)})"
        reason_g = ("duplicate: " + said + " for " + tenor_g + " on " + counted + " lines: " + listed + more
                    + "; none is kept")
        out = c[["file", "line", "raw"]].copy()
        out["reason"] = _texts(out, reason_g[cg])
        out["check_name"] = _texts(out, "duplicate")
        rejected.append(out)
        heads = c.iloc[c_starts]
        finding = pd.DataFrame({
            "file": heads["file"].to_numpy(), "curve": name, "as_of": heads["as_of"].to_numpy(),
            "tenor": tenor_g, "rows": size,
            "detail": said + " on " + counted + " lines of one file: " + listed + more,
        })
    if repeat.any():
        # one reason per group, shared by its rows: a flood of repeats holds one string, not one per row
        said = "duplicate: repeats line " + line[starts].astype(str).astype(object) + " with the same value"
        out = d.loc[repeat, ["file", "line", "raw"]].copy()
        out["reason"] = _texts(out, said[gid[repeat]])
        out["check_name"] = _texts(out, "duplicate")
        rejected.append(out)
    drop[pos[conflict | repeat]] = True
    return drop, rejected, finding


def _texts(frame: pd.DataFrame, values: object) -> pd.Series:
    """A text column kept as Python objects: a string column would copy every reason into its own
    buffer (the store's Arrow table does that once, at the end), where most of them are one shared string."""
    if isinstance(values, str):
        values = np.full(len(frame), values, dtype=object)
    return pd.Series(values, index=frame.index, dtype=object)


def _reject(frame: pd.DataFrame, mask: np.ndarray, reason: object, check: str) -> pd.DataFrame:
    out = frame.loc[mask, ["file", "line", "raw"]].copy()
    out["reason"] = _texts(out, reason if isinstance(reason, str) else np.asarray(reason, dtype=object)[mask])
    out["check_name"] = _texts(out, check)
    return out


def prepare_quotes(result: ReadResult, cfg: Config, curve: str | None) -> Intake:
    """Turn one file's :class:`ReadResult` into accepted rows and rejected rows.

    The row-level expectations are not run here; :func:`validate_intakes` runs them over many files.
    """
    return prepare_many([result], cfg, [curve])[0]


def prepare_many(results: Sequence[ReadResult], cfg: Config, curves: Sequence[str | None]) -> list[Intake]:
    """:func:`prepare_quotes` for many files at once: one pass over all their rows, split at the end.

    ``curves[k]`` is the curve file ``k`` was routed to (``None``: only its ``curve`` column says).
    """
    n_files = len(results)
    row_parts = [r.rows.assign(file=k) for k, r in enumerate(results) if len(r.rows)]
    rej_parts = [r.rejected.assign(file=k, check_name="unparseable") for k, r in enumerate(results)
                 if len(r.rejected)]
    rejected: list[pd.DataFrame] = [pd.concat(rej_parts, ignore_index=True)] if rej_parts else []
    accepted, dup_findings = [], []
    if row_parts:
        rows = pd.concat(row_parts, ignore_index=True)
        files = rows["file"].to_numpy()
        routed = np.array(list(curves), dtype=object)[files]
        named = rows["curve"].to_numpy(dtype=object)
        names = np.where(pd.isna(named), routed, named)
        rows["curve"] = names
        unknown = ~np.isin(names, np.array(list(cfg.curves), dtype=object))
        if unknown.any():
            shown = np.array(["" if n is None else repr(n) for n in names], dtype=object)
            reason = np.where(shown == "", "no curve: the file name matches no curve's files glob; use --curve",
                              "unknown curve " + shown + "; configured: " + ", ".join(sorted(cfg.curves)))
            rejected.append(_reject(rows, unknown, reason, "unknown_curve"))
            rows = rows.loc[~unknown]
            names = names[~unknown]

        for name in pd.unique(names):
            c = cfg.curves[str(name)]
            part = rows.loc[names == name]
            part = part.assign(rate=to_decimal(part["value"].to_numpy(), c.units))
            known = np.isin(part["tenor"].to_numpy(dtype=object), np.array(c.tenor_labels, dtype=object))
            if (~known).any():
                # one reason per distinct tenor, shared by its rows
                codes, labels = pd.factorize(part["tenor"].astype(str).to_numpy(dtype=object))
                said = "unknown tenor: " + np.asarray(labels, dtype=object) + f" is not one of curves.{name}.tenors"
                rejected.append(_reject(part, ~known, said[codes], "unknown_tenor"))
                part = part.loc[known]
            drop, dup_rejected, finding = _duplicates(part, str(name), c.units)
            rejected.extend(dup_rejected)
            if finding is not None:
                dup_findings.append(finding)
            if drop.any():
                part = part.loc[~drop]

            as_of = part["as_of"].to_numpy(dtype="datetime64[D]")
            maturity = np.empty(len(part), dtype="datetime64[D]")
            tenor_values = part["tenor"].to_numpy(dtype=object)
            for tenor in pd.unique(tenor_values):
                sel = tenor_values == tenor
                maturity[sel] = maturity_dates(as_of[sel], tenor, c.calendar)
            accepted.append(part.assign(maturity_date=maturity))

    def split(frames: list[pd.DataFrame], columns: list[str]) -> list[pd.DataFrame]:
        if not frames:
            return [_empty(columns) for _ in range(n_files)]
        allf = pd.concat(frames, ignore_index=True)
        allf = allf.sort_values(["file", "line"] if "line" in allf else ["file"], kind="stable")
        # sorted by file, each file's rows are one slice: cheaper than a take per file
        bounds = np.searchsorted(allf["file"].to_numpy(), np.arange(n_files + 1))
        allf = allf[columns].reset_index(drop=True)
        return [_empty(columns) if a == b else allf.iloc[a:b].reset_index(drop=True)
                for a, b in itertools.pairwise(bounds.tolist())]

    rows_by_file = split(accepted, ROW_COLUMNS)
    rej_by_file = split(rejected, REJECT_COLUMNS)
    dup_by_file = split(dup_findings, ["curve", "as_of", "tenor", "rows", "detail"])
    return [Intake(rows_by_file[k], rej_by_file[k], dup_by_file[k]) for k in range(n_files)]


def load_findings(intake: Intake, cfg: Config) -> pd.DataFrame:
    """Findings a load raises for one file: rows that broke a row-level expectation on a known day,
    and (day, tenor) pairs quoted twice with different values. Columns: curve, as_of, check_name,
    severity, tenor, detail.

    Rejected rows give one finding per (curve, day, check, tenor): its detail is ``line N: reason``
    for a single row, else the count and the first :data:`~pipeline.wording.SHOWN` lines with their
    reasons, then how many more (so a flood of bad rows on one day is one bounded finding)."""
    parts = []
    rj = intake.rejected
    if len(rj) and "as_of" in rj:
        named = rj.loc[rj["as_of"].notna() & rj["check_name"].isin(["out_of_range", "unparseable"])]
        if len(named):
            key = ["curve", "as_of", "check_name", "tenor"]
            g = named[[*key, "line", "reason"]].assign(tenor=named["tenor"].astype(object).where(
                named["tenor"].notna(), ""))
            g = g.sort_values([*key, "line"], kind="stable")
            gid = _group_starts(g, key)
            n_g = int(gid[-1]) + 1
            heads = np.flatnonzero(np.r_[True, gid[1:] != gid[:-1]])
            items = "line " + g["line"].astype(str).to_numpy(dtype=object) + ": " \
                + g["reason"].astype(str).to_numpy(dtype=object)
            listed, size = first_items(gid, items, n_g, sep="; ")
            more = more_text(size, np.minimum(size, SHOWN), "lines")
            counted = np.array([f"{n:,} lines: " if n > 1 else "" for n in size.tolist()], dtype=object)
            tenor = g["tenor"].to_numpy(dtype=object)[heads]
            parts.append(pd.DataFrame({
                "curve": g["curve"].to_numpy(dtype=object)[heads], "as_of": g["as_of"].to_numpy()[heads],
                "check_name": g["check_name"].to_numpy(dtype=object)[heads],
                "tenor": np.where(tenor == "", None, tenor),
                "detail": counted + listed + more,
            }))
    d = intake.duplicates
    if len(d):
        parts.append(pd.DataFrame({"curve": d["curve"].to_numpy(dtype=object), "as_of": d["as_of"].to_numpy(),
                                   "check_name": "duplicate", "tenor": d["tenor"].to_numpy(dtype=object),
                                   "detail": d["detail"].to_numpy(dtype=object)}))
    if not parts:
        return _empty(["curve", "as_of", "check_name", "severity", "tenor", "detail"])
    out = pd.concat(parts, ignore_index=True)
    # one lookup per (curve, check) pair, not per finding
    pairs = out[["curve", "check_name"]].astype(str).drop_duplicates()
    sev = {(c, k): cfg.curves[c].severity[k] for c, k in zip(pairs["curve"], pairs["check_name"], strict=True)}
    out["severity"] = [sev[(str(c), str(k))] for c, k in zip(out["curve"], out["check_name"], strict=True)]
    return out[["curve", "as_of", "check_name", "severity", "tenor", "detail"]]


def validate_intakes(intakes: Sequence[Intake], cfg: Config, validator: RowValidator) -> None:
    """Run the row-level expectations over the accepted rows of many files at once, in place.

    Rows of each curve from all the files are validated together (one suite run per curve); failing
    rows move from each file's ``rows`` to its ``rejected`` with the validator's plain reason.
    Each file receives the summary of the run its rows took part in. Rows moved to ``rejected`` keep
    their ``curve``, ``as_of`` and ``tenor``, so a finding can name the day.
    """
    frames = []
    for k, it in enumerate(intakes):
        if len(it.rows):
            frames.append(it.rows.assign(_file=k, _pos=np.arange(len(it.rows))))
    if not frames:
        return
    allrows = pd.concat(frames, ignore_index=True)
    failed: dict[int, list[tuple[np.ndarray, np.ndarray, np.ndarray]]] = {}
    for name in pd.unique(allrows["curve"].to_numpy(dtype=object)):
        part = allrows.loc[allrows["curve"].to_numpy(dtype=object) == name]
        ok, reasons, checks, summary = validator(part[["line", "as_of", "tenor", "rate", "value", "raw"]],
                                                 cfg.curves[str(name)])
        files = part["_file"].to_numpy()
        for k in np.unique(files):
            intakes[int(k)].validations.append(summary)
        if ok.all():
            continue
        bad = ~ok
        for k in np.unique(files[bad]):
            sel = bad & (files == k)
            failed.setdefault(int(k), []).append((
                part["_pos"].to_numpy()[sel],
                reasons.to_numpy(dtype=object)[sel],
                checks.to_numpy(dtype=object)[sel],
            ))
    for k, parts in failed.items():
        it = intakes[k]
        pos = np.concatenate([p for p, _, _ in parts])
        mask = np.zeros(len(it.rows), dtype=bool)
        mask[pos] = True
        moved = it.rows.iloc[pos][["line", "raw", "curve", "as_of", "tenor"]].copy()
        moved["reason"] = _texts(moved, np.concatenate([r for _, r, _ in parts]))
        moved["check_name"] = _texts(moved, np.concatenate([c for _, _, c in parts]))
        it.rejected = (pd.concat([it.rejected, moved], ignore_index=True)
                       .sort_values("line", kind="stable").reset_index(drop=True))
        it.rows = it.rows.loc[~mask].reset_index(drop=True)
