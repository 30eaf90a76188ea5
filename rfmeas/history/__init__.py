"""What was measured before: the history store, before/after comparison, production lots."""
