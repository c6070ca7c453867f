"""The audit report: frames in, one self-contained HTML page out.

Pure rendering: no store access, no printing, no network. Charts are drawn with matplotlib on its
SVG canvas and embedded inline; the stylesheet is embedded; the page holds no script.
"""

from pipeline.report.html import SECTIONS, input_fingerprint, render_report
from pipeline.report.model import CurveReport, ReportData, choose_pairs

__all__ = ["SECTIONS", "CurveReport", "ReportData", "choose_pairs", "input_fingerprint", "render_report"]
