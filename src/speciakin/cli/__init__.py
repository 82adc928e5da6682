"""Command-line interface: a thin layer over the library."""
