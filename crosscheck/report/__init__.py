"""Report writers: each turns computed results into one output format and nothing else."""
