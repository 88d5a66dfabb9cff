"""Floor 6, reports: each module turns results into one output format and nothing else.

For the rest of the project: ``outputs`` (render_report, verify_format), ``reduction``, ``results_text``,
``fuzz_summary``, ``frame`` (verdict_frame). Imports floors 0 to 5.
"""
