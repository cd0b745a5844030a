"""The plan: its typed model, its file format (read, write, recognise), a view for the reports, and independent verification."""
