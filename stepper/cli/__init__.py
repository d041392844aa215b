"""The command line: a thin layer that parses flags and calls the core."""
