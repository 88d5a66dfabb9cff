"""Running cases end to end: both routes and the judgement for each case, locally or on any executor."""
