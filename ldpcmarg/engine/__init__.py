"""Monte Carlo engine: the sweep scheduler, results store, executors, statistics."""
