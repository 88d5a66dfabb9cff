"""Floor 5, fuzzing: seeded random networks through both routes, shrinking what disagrees.

For the rest of the project: ``loop`` (FuzzOptions, run_fuzz), ``batch`` (run_fuzz_batch), ``generate``
(generate_case, Knobs), ``large`` (scaled families for benchmarks), ``strategies`` (Hypothesis),
``faults`` (deliberate bugs as broken stamps), ``reproducer`` (summary_document). Imports floors 0 to 4.
"""
