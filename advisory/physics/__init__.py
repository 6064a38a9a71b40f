"""Physics: standard atmosphere and profiles, ray tracing, ground signature."""
