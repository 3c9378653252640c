"""Outputs people open: HTML route map, session report, model report."""
