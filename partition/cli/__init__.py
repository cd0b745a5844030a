"""The thin command line: argument parsing, the terminal, and one module per sub-command in commands."""
