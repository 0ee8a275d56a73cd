"""matgen.bake."""
