"""The Monte Carlo layer: random streams and blocks, quantile maps, drawing built strings, mixed stock,
the executor (chunks, worker processes), accumulators, estimates with intervals, importance sampling."""
