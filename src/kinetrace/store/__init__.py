"""kinetrace.store."""
