"""The self-contained HTML run report."""
from .html import ReportContent, ReportFigure, ReportTable, render_html

__all__ = ["ReportContent", "ReportFigure", "ReportTable", "render_html"]
