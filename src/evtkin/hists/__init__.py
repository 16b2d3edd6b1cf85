"""hists layer of evtkin."""
