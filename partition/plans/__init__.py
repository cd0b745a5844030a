"""The plan: its file format (read, write, recognise), a checked read-only view, and independent verification."""
