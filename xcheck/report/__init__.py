"""Rendering: report.md, summary.json and every figure."""
