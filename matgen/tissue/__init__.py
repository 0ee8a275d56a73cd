"""matgen.tissue."""
