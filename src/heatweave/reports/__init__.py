"""Reports of a finished run: terminal table, JSON, CSV waveforms, PNG figure.

Every writer reads one :class:`RunReport` (built by :func:`build_report`), so the table on
the terminal and the files agree to the last digit.  Each writer returns text or bytes; the
caller writes them (atomically, :func:`heatweave.files.write_atomic`).  matplotlib is imported
only by :mod:`heatweave.reports.plot`.
"""

from __future__ import annotations

from heatweave.reports.cautions import CAUTION_LINE, CAUTION_TEXT
from heatweave.reports.model import PartRow, RunReport, build_report

__all__ = ["CAUTION_LINE", "CAUTION_TEXT", "PartRow", "RunReport", "build_report"]
