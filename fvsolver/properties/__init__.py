"""Thermophysical properties: water, moist air, working fluids, convection and the wet porous cap."""
