"""Reporting layer: JSON document, text summary, figures."""
