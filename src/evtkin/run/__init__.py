"""run layer of evtkin."""
