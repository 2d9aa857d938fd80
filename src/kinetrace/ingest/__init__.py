"""kinetrace.ingest."""
