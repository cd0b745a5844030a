"""Postman algorithms: required passes as tasks, exact T-join and min-cost flow, the mixed heuristic, connecting pieces, Eulerization and lower bounds."""
