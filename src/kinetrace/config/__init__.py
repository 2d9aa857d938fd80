"""kinetrace.config."""
