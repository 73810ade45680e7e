"""Fill bodies as cell-average thickness grids."""
