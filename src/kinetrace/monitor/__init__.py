"""kinetrace.monitor."""
