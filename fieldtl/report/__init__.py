"""Turning an Assessment into text, JSON, CSV, a chart and a PDF report (no computation here)."""
