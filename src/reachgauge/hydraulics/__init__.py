"""Hydraulics above the kernel: bankfull stage, roughness, section figures,
design-flow capacity, calibration of n, and the hydraulics step of a reach."""
