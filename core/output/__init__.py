"""Results turned into words, numbers and files: readings, tables, documents and the report."""
