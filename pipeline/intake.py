"""From what a reader found to quote rows ready for the archive.

Assigns each row its curve, converts the file's units to decimals, rejects duplicates and tenors the
curve does not know, runs the row-level expectations, and computes each quote's maturity date.
Every row ends in exactly one of the two frames returned.
"""

from __future__ import annotations

import fnmatch
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from pipeline.config import Config, ConfigError
from pipeline.dates import maturity_dates
from pipeline.readers import ReadResult, to_decimal

__all__ = ["Intake", "route_curve", "prepare_quotes"]

REJECT_COLUMNS = ["line", "raw", "reason", "check_name"]
ROW_COLUMNS = ["curve", "as_of", "tenor", "maturity_date", "rate", "line"]

# (rows of one curve, that curve's config) -> (ok mask, reasons, check names, summary dict)
RowValidator = Callable[[pd.DataFrame, object], tuple[np.ndarray, pd.Series, pd.Series, dict]]


@dataclass
class Intake:
    rows: pd.DataFrame            # ROW_COLUMNS
    rejected: pd.DataFrame        # REJECT_COLUMNS
    duplicates: pd.DataFrame      # curve, as_of, tenor, lines, detail: same key twice with different values
    validations: list[dict] = field(default_factory=list)


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


def _reject(frame: pd.DataFrame, mask: np.ndarray, reason: object, check: str) -> pd.DataFrame:
    out = frame.loc[mask, ["line", "raw"]].copy()
    out["reason"] = reason if np.isscalar(reason) else np.asarray(reason, dtype=object)[mask]
    out["check_name"] = check
    return out


def prepare_quotes(result: ReadResult, cfg: Config, curve: str | None,
                   validator: RowValidator | None = None) -> Intake:
    """Turn a :class:`ReadResult` into accepted rows and rejected rows (see the module docstring)."""
    rejected = [result.rejected.assign(check_name="unparseable")[REJECT_COLUMNS]] if len(result.rejected) else []
    rows = result.rows.copy()
    if explicit_curve := curve:
        rows["curve"] = rows["curve"].where(rows["curve"].notna(), explicit_curve)
    unknown = ~rows["curve"].isin(list(cfg.curves)).to_numpy()
    if unknown.any():
        names = rows["curve"].fillna("")
        reason = np.where(names.to_numpy() == "",
                          "no curve: the file name matches no curve's files glob; use --curve",
                          "unknown curve " + names.map(repr).to_numpy(dtype=object) + "; configured: "
                          + ", ".join(sorted(cfg.curves)))
        rejected.append(_reject(rows, unknown, reason, "unknown_curve"))
        rows = rows.loc[~unknown]

    accepted, dup_findings, validations = [], [], []
    for name, part in rows.groupby("curve", sort=True):
        c = cfg.curves[str(name)]
        part = part.copy()
        part["rate"] = to_decimal(part["value"].to_numpy(), c.units)
        known = part["tenor"].isin(c.tenor_labels).to_numpy()
        if (~known).any():
            rejected.append(_reject(part, ~known,
                                    "unknown tenor: " + part["tenor"].astype(str).to_numpy(dtype=object)
                                    + f" is not one of curves.{name}.tenors", "unknown_tenor"))
            part = part.loc[known]

        # the same (as_of, tenor) twice in one file: identical repeats keep the first line;
        # conflicting values keep none of them, since neither can be trusted over the other
        key = ["as_of", "tenor"]
        grp = part.groupby(key, sort=False)
        spread = grp["rate"].transform("max") - grp["rate"].transform("min")
        first_line = grp["line"].transform("min")
        conflict = (spread > 1e-12).to_numpy()
        repeat = (~conflict) & (part["line"] != first_line).to_numpy()
        if conflict.any():
            bad = part.loc[conflict]
            lines = bad.groupby(key)["line"].apply(lambda s: ", ".join(str(x) for x in sorted(s))).rename("lines")
            values = bad.groupby(key)["rate"].apply(lambda s: ", ".join(f"{x:.6g}" for x in s)).rename("values")
            joined = bad.join(lines, on=key).join(values, on=key)
            rejected.append(_reject(joined, np.ones(len(joined), bool),
                                    "duplicate: conflicting values " + joined["values"].to_numpy(dtype=object)
                                    + " on lines " + joined["lines"].to_numpy(dtype=object), "duplicate"))
            d = pd.concat([lines, values], axis=1).reset_index()
            d["curve"] = name
            d["detail"] = "values " + d["values"] + " on lines " + d["lines"] + " of one file"
            dup_findings.append(d[["curve", "as_of", "tenor", "lines", "detail"]])
        if repeat.any():
            rejected.append(_reject(part, repeat, "duplicate: repeats line "
                                    + first_line.astype(str).to_numpy(dtype=object) + " with the same value",
                                    "duplicate"))
        part = part.loc[~conflict & ~repeat]

        if validator is not None and len(part):
            ok, reasons, checks, summary = validator(part, c)
            validations.append(summary)
            if (~ok).any():
                bad = part.loc[~ok, ["line", "raw"]].copy()
                bad["reason"] = reasons[~ok].to_numpy(dtype=object)
                bad["check_name"] = checks[~ok].to_numpy(dtype=object)
                rejected.append(bad)
                part = part.loc[ok]

        as_of = part["as_of"].to_numpy(dtype="datetime64[D]")
        maturity = np.empty(len(part), dtype="datetime64[D]")
        tenor_values = part["tenor"].to_numpy()
        for tenor in pd.unique(tenor_values):
            sel = tenor_values == tenor
            maturity[sel] = maturity_dates(as_of[sel], tenor, c.calendar)
        part["maturity_date"] = maturity
        accepted.append(part[ROW_COLUMNS])

    out_rows = (pd.concat(accepted, ignore_index=True) if accepted
                else pd.DataFrame({c: pd.Series([], dtype=object) for c in ROW_COLUMNS}))
    out_rej = (pd.concat(rejected, ignore_index=True).sort_values("line", kind="stable").reset_index(drop=True)
               if rejected else pd.DataFrame({c: pd.Series([], dtype=object) for c in REJECT_COLUMNS}))
    dups = (pd.concat(dup_findings, ignore_index=True) if dup_findings
            else pd.DataFrame(columns=["curve", "as_of", "tenor", "lines", "detail"]))
    return Intake(out_rows, out_rej, dups, validations)
