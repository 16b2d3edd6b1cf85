"""output layer of evtkin."""
