"""studyflow: mesh-refinement and parameter studies for CFD solvers.

Layers, imported downward only:
spec -> design -> render -> workflow -> collect -> analysis -> report / bundle,
with ``api`` (the Python facade) and ``cli`` (the thin command line) on top.
The bundled solver ``studyflow.fvsolver`` stands apart and imports none of them.
"""

__version__ = "0.1.0"
