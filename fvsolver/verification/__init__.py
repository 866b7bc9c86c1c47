"""Exact solutions of heat-conduction problems used to verify the finite-volume solver.

:mod:`fvsolver.verification.analytic` holds the semi-infinite solid with
surface convection and the steady plane, cylindrical and spherical layer
solutions; :mod:`fvsolver.verification.analytic_transient` holds the
eigenfunction series for plane walls, cylinders and spheres, their energy
fractions and the finite-cylinder product solution.
"""
