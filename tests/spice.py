"""The ngspice netlist builder and runner of the tests: it lives in the package (``supplycfg.spice``),
where ``supplycfg bench`` times ngspice on the same circuit."""

from supplycfg.spice import (DRIVE_KEYS, DRIVE_VECTORS, KEYS, NGSPICE, SPEED_FLOOR_SHARE, VECTORS,  # noqa: F401
                             DriveModel, LoadSweep, SpiceError, generator_netlist, num, occ_table, pwl_args, run,
                             solve)
