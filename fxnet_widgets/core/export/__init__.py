"""Hardware hand-off: constants, table images and golden vectors of a plan.

:func:`export` writes one directory that an RTL engineer can use directly:

``manifest.json``
    every file (with its SHA-256), and per layer and neuron the integer
    weights, bias, widths, shift, rounding, table file, address and word
    widths, signedness and the table's address layout (offset binary);
``fxnet_design_pkg.vhd``, ``fxnet_design.vh``, ``fxnet_design.h``
    the same constants as a VHDL-2008 package (IEEE 1076-2008, numeric_std
    words), Verilog-2005 ``localparam`` s (IEEE 1364-2005) and a C header;
``tables/layerN_table.memh``
    one ``$readmemh`` image per table (IEEE 1364-2005 section 17.2.9);
``vectors/*.memh``, ``vectors/golden.csv``
    golden vectors: inputs, every accumulator and code, decisions;
``network.json``, ``plan.json``
    copies of the inputs of the export.

:func:`read_export` reads the directory back (and checks the hashes).
"""

from ._api import ExportedDesign, ExportedLayer, ExportResult, export, read_export
from ._design import FILES, PREFIX, VHDL_PACKAGE
from ._memh import memh_text, parse_memh
from ._names import KEYWORDS, is_identifier, sanitise, unique_identifiers

__all__ = [
    "FILES",
    "KEYWORDS",
    "PREFIX",
    "VHDL_PACKAGE",
    "ExportResult",
    "ExportedDesign",
    "ExportedLayer",
    "export",
    "is_identifier",
    "memh_text",
    "parse_memh",
    "read_export",
    "sanitise",
    "unique_identifiers",
]
