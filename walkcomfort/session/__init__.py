"""Session import: manifest, one reader per source, clocks and lag, timeline, QA."""
