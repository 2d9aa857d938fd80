"""kinetrace.reconcile."""
