"""The reference datapath: synthesizable Verilog-2005 and VHDL-2008 of a (network, plan).

:func:`write_datapath` writes ``fxnet_datapath.v`` (module ``fxnet_datapath``),
``fxnet_datapath.vhd`` (entity ``fxnet_datapath``), the tables as ``$readmemh``
images opened by bare file name, and ``datapath.json`` (``latency`` ...), per
the contract's section "Reference datapath (generated RTL)": one sample per
clock, constant latency, no back-pressure, bit-exact with the integer network.

Rooms: ``_graph`` (the levels of named signals and their value intervals),
``_pipeline`` (where the register banks go), ``_resolve`` (names and used bits
once the registers are fixed), ``_verilog`` / ``_vhdl`` (the writers),
``_testbench`` (self-checking benches from the emulation), ``_api``.
"""

from ._api import DATAPATH_KIND, VERILOG_FILE, VHDL_FILE, DatapathResult, plan_datapath, table_name, write_datapath
from ._pipeline import DEFAULT_CLOCK_MHZ
from ._testbench import default_vectors, schedule

__all__ = [
    "DATAPATH_KIND",
    "DEFAULT_CLOCK_MHZ",
    "VERILOG_FILE",
    "VHDL_FILE",
    "DatapathResult",
    "default_vectors",
    "plan_datapath",
    "schedule",
    "table_name",
    "write_datapath",
]
