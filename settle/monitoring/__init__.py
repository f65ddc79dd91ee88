"""Monitoring: readings against the prediction, the back-analysis of volume loss and trough width, the fitted
project file and the monitored cross-sections.

May import: `settle.errors`, `settle.inputs`, `settle.engine` and `settle.assessments`. Never a run module, and never
`gis_out`.
"""
