"""Check a G-code program on what it says: read it back, replay it against
the part, and state the tolerance budget.

* :mod:`pathgen.verify.reader`: the program's text → moves in mm (own
  interpreter, independent of the writer), with the NISTIR 6556 checks.
* :mod:`pathgen.verify.replay`: the replayed moves against the exact
  tool-center curve (two-sided deviation) and the tolerance budget.
* :mod:`pathgen.verify.part`: a part program (several outlines) split into
  passes, each measured against the outline it follows; tabs, hole order.
* :mod:`pathgen.verify.compensated`: a program for cutter compensation at
  the control (G41/G42): the part line, the entry and exit, arcs toward
  the tool, the tool disc swept along the part line offset by the radius.
"""

from .reader import Problem, Program, read_gcode, read_gcode_file

__all__ = ["Problem", "Program", "read_gcode", "read_gcode_file"]
