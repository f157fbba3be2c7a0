"""Characterization: deck + cells -> SI arrays -> physics -> records (no I/O)."""
