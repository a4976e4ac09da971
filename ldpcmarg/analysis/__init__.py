"""Analysis: capacity, density evolution, soft-output quality, decoder comparison, posteriors."""
