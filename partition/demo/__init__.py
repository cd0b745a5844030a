"""The invented demo town Tallowmere: a seeded generator of street networks and their configs (demo data and benchmarks only)."""
