"""matgen.color."""
