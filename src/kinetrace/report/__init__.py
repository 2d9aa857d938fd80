"""kinetrace.report."""
