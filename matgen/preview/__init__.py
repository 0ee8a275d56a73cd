"""matgen.preview."""
