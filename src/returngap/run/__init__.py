"""The only place that forks or starts threads: the parallel policy and the pipeline."""
