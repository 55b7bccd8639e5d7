"""Pure, vectorised physics for the planner.

Brine thermodynamics (Part A), surface energy balance (Part B), dose, passes, verdicts, calibration
and sampling (Parts C–E), solar position and terrain.  No files, no printing; every function accepts
scalars and numpy arrays.
"""
