"""kinetrace.kinetics."""
