"""A run: compute the stresses and settlement of a site, plan its cost, write its results folder, batches."""
