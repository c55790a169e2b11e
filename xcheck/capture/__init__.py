"""The measured side: Trace and PeakTable, one reader per format, clipping, alignment."""
