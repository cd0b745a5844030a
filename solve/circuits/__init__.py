"""Circuits: turn classification and penalties, Hierholzer's circuit and the turn-aware circuit."""
