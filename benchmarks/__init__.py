"""Benchmarks of wallscreen, and the plain per-wall implementation they compare against."""
