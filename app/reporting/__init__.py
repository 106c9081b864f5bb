"""Reporting: server-side SVG charts (and, beside them, the report builder)."""
