"""Floor 1, the model: user text turned into the immutable network and the case to run.

For the rest of the project: ``network`` (Network, Element, Port), ``validation`` (validate), ``netlist`` (read_netlist,
read_netlist_text), ``netlist_writer`` (write_netlist), ``cases`` (Case, load_case, find_case_files), ``case_file`` (a case
file's TOML read and its structure checked, with the documented limits), ``files`` (regular files only,
size-capped, never blocking),
``tolerance`` (Tolerance and the defaults), ``frequencies``, ``values``, ``graph`` (UnionFind) and
``expect_option``. Imports only ``errors``, ``vocabulary`` and ``version``.
"""
