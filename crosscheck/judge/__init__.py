"""Floor 3, judging: the routes against each other, hand values, design limits, baselines.

For the rest of the project: ``result`` (CaseResult, the one result type), ``case`` (judged,
with_baseline), ``records`` (the judgement records and their Cause), ``compare``, ``baseline``.
Imports floors 0 to 2.
"""
