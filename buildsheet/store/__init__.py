"""store stage of the buildsheet pipeline."""
