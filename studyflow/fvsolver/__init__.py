"""A small steady 2D incompressible laminar finite-volume solver, shipped with studyflow.

It is a separate program (console command ``studyflow-fv``): it imports only numpy, scipy,
meshio and the standard library, and studyflow drives it through a template and a command
line exactly as it drives any other solver.

Method in one paragraph: staggered (MAC) grid on a rectangle with geometric (exponential)
stretching; second-order central differences for convection and diffusion; the discrete
steady Navier-Stokes equations for (u, v, p) are solved together by Newton's method with the
exact Jacobian, one sparse LU factorisation per full step.
"""

__version__ = "0.1.0"
