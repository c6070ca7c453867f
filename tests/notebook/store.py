"""A small synthetic store for the notebook handle's tests, built by the real steps from real files.

Three curves over the business days of 2030-01 .. 2032-06 (about 640 days), nine tenors 1M .. 10Y,
every quote present, values from the seeded five-factor generator the term-structure tests use:

* ``govt``: par yields, semiannual, ACT/365F, ``monotone_convex`` (the demo Treasury's conventions,
  so the README's example runs on it unchanged);
* ``lz``: zero rates, annual compounding, ACT/ACT, ``linear_zero``;
* ``lld``: zero rates, annual compounding, 30/360, ``log_linear_discount``.

The folder is named ``afterward-demo`` so that the README's example, which opens
``afterward-demo/afterward.toml``, runs from its parent.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from flows.load_step import load_files
from tests.e2e.stores import Project, make_project, run_all_steps, write_wide_csv
from tests.pipeline.term_structure.panels import synthetic_yields

TENORS = ["1M", "3M", "6M", "1Y", "2Y", "3Y", "5Y", "7Y", "10Y"]
MONTHS = np.array([1, 3, 6, 12, 24, 36, 60, 84, 120])
HOLIDAYS = ["2030-12-25", "2031-01-01", "2031-12-25", "2032-01-01"]
CURVES = {  # name: (quote, compounding, day count, interpolation, seed)
    "govt": ("par", "semiannual", "ACT/365F", "monotone_convex", 31),
    "lz": ("zero", "annual", "ACT/ACT", "linear_zero", 32),
    "lld": ("zero", "annual", "30/360", "log_linear_discount", 33),
}


def _toml() -> str:
    lines = ['[store]', 'path = "store.duckdb"', '']
    for name, (quote, comp, dc, method, _) in CURVES.items():
        lines += [
            f"[curves.{name}]", f'files = "{name}_*.csv"', f'quote = "{quote}"', f'compounding = "{comp}"',
            f'day_count = "{dc}"', 'units = "decimal"', f'interpolation = "{method}"',
            "tenors = [" + ", ".join(f'"{t}"' for t in TENORS) + "]",
            'calendar.weekend = ["Sat", "Sun"]',
            "calendar.holidays = [" + ", ".join(f'"{h}"' for h in HOLIDAYS) + "]",
            'forward.starts = ["0M", "6M", "1Y", "2Y"]', 'forward.tenors = ["3M", "1Y", "2Y"]',
            "realize.tolerance_days = 3", "checks.jump_bp = 500", "",
        ]
    return "\n".join(lines)


def business_days() -> np.ndarray:
    span = np.arange(np.datetime64("2030-01-01"), np.datetime64("2032-07-01"))
    return span[np.is_busday(span, holidays=HOLIDAYS)]


def quotes(name: str) -> np.ndarray:
    """The ``(D, 9)`` decimals written for curve ``name`` (what QuantLib is given in the tests)."""
    cc = synthetic_yields(CURVES[name][4], business_days().size)[:, MONTHS - 1]
    if CURVES[name][0] == "par":
        return np.round(cc, 8)             # any smooth set of yields is a par curve to bootstrap
    return np.round(np.expm1(cc), 10)      # annual compounding


def build_store(parent: Path) -> Project:
    root = parent / "afterward-demo"
    p = make_project(root, _toml())
    days = business_days()
    files = [write_wide_csv(root / f"{name}_all.csv", days, TENORS, quotes(name), "%.10f") for name in CURVES]
    load_files(p.cfg, files)
    run_all_steps(p.cfg)
    return p
