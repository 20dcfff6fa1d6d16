"""Gain-medium materials: the data model (material.py), the built-in materials (one TOML file each,
every value with its source) and the registry that loads and checks them (registry.py). Imports
units and kernels only.
"""
