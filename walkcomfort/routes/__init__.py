"""Planned routes: geometry and timing, weather sources, shade schemes, prediction, comparison."""
