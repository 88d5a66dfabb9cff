"""Judging: the two routes compared, hand calculations and their slips, design limits, baselines."""
