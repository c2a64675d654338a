"""The linear predictor over the data: parameter layout, design passes, sources, threads."""
