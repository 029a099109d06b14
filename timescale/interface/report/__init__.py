"""The comparison report: a self-contained HTML page with figures (``html``), the figures it
embeds (``figures``), and the re-run of representative cells whose waveforms a cube does not
keep (``rerun``). The verdicts come from :mod:`timescale.analysis.findings`.
"""

from timescale.analysis.findings import DEFAULT_TARGET, CellRow, Finding, cell_summary, findings
from timescale.interface.report.html import write_report

__all__ = ["write_report", "findings", "cell_summary", "Finding", "CellRow", "DEFAULT_TARGET"]
