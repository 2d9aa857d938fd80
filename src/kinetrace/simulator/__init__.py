"""kinetrace.simulator."""
