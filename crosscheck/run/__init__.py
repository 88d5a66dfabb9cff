"""Floor 4, running cases end to end: the own route here, ngspice in the pool, then the judgement.

For the rest of the project: ``check`` (run_cases, case_from_netlist), ``batch`` (run_batch on any
executor, cluster_executor). Imports floors 0 to 3.
"""
