"""toy layer of evtkin."""
