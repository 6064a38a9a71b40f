"""Precomputed boom tables: grid, builder, file format, fast lookup, runtime rebuild."""
