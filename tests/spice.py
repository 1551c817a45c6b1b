"""The ngspice netlist builder and runner of the tests: it lives in the package (``supplycfg.spice``),
where ``supplycfg bench`` times ngspice on the same circuit."""

from supplycfg.spice import (KEYS, NGSPICE, VECTORS, LoadSweep, SpiceError, generator_netlist, num,  # noqa: F401
                             occ_table, pwl_args, run, solve)
