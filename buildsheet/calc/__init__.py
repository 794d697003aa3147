"""calc stage of the buildsheet pipeline."""
