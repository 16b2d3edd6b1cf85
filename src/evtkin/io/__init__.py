"""io layer of evtkin."""
