"""kinetrace.chemistry."""
