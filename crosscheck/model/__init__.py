"""The network model and what builds it: values, the network and its validation, the netlist reader and writer, parameters, case files, tolerances."""
