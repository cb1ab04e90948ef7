"""Pure numpy/scipy science for Porecast.

Nothing in this package imports the web, database or worker layers.
Units everywhere: depth m (positive down), time Ma before present, temperature
degC, pressure MPa, velocity m/s, density g/cm3, moduli GPa, porosity and
volumes as fractions, grain size mm, salinity ppm NaCl.
"""
