"""Many views of one city's fits: diagnostics (and, later, comparisons and sensitivity analyses)."""
