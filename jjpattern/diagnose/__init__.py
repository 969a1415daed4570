"""Diagnostics: flags with plain-language meaning and numeric evidence."""
