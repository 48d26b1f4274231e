"""Running levels: grids, the solver protocol and its adapters, executors, the level cache."""
