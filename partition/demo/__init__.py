"""The invented demo town Tallowmere (demo data and benchmarks only): layout (the seeded street generator), street_names, towngen (its files and config)."""
