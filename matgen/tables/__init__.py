"""matgen.tables."""
