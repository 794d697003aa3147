"""spec stage of the buildsheet pipeline."""
