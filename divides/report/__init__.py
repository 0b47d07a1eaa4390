"""Outputs of an assessment: summary, verdict text, report, figures, GIS layers, rasters and tables.

The only room besides ``divides.io`` that writes files, and the only one that draws.
"""

from __future__ import annotations

from divides.report.writer import STAGES, check_out_dir, staged_output, write, write_assessment

__all__ = ["write", "write_assessment", "staged_output", "check_out_dir", "STAGES"]
