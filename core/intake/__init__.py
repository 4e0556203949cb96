"""Getting a table in: reading files with notes on every conversion, and profiling columns."""
