"""Engine: greenfield ground movements.

Holds the published trough models, one vectorised function each (`troughs`), the excavated length cut into tunnel
elements (`elements`), their superposition on the grid and at places (`field`), and the movement arrays it returns
(`movements`).

May import: `settle.errors` and `settle.inputs`. Never an assessment, monitoring or run module, and never `gis_out`.
"""
