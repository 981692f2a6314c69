"""Benchmarks: synthetic corpus generator, import benchmark, query suite harness."""
