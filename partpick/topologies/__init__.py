"""Oscillator topologies, one module each: slots, equations and netlist."""
