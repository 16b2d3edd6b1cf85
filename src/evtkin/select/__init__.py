"""select layer of evtkin."""
