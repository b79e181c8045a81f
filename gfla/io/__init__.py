"""Reading what users write: field specs, matrix text, matrix files."""
