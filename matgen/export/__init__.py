"""matgen.export."""
