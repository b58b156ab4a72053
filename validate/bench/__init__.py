"""Benchmarks (`make bench`): speed and memory of the main jobs as ratios to floors measured in the same run."""
