"""The house-library store: the only layer of matcher that speaks SQL."""
