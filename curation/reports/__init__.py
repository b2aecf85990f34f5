"""Reports and pictures built from the history: lineage drawings, later exports and summaries."""
