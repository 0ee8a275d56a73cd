"""matgen.fit."""
