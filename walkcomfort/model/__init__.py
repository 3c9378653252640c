"""Comfort model: history features, gradient-boosted classifier, grouped validation, bundles."""
