"""Field maps: evaluation grids, quantities, exact-path field evaluation and export."""
