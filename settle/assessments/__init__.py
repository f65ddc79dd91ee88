"""Assessments: what the greenfield movements mean for buildings, buried utilities and the face.

Published methods stand apart from the procedures that apply them: `building_damage` (methods) and `buildings`
(wall by wall); `utility_strains` (methods) and `utilities` (pipe by pipe); `face_methods` (methods) and
`face_stations` (station by station along a drive). `*_tables` turn their results into the rows and columns of the
outputs. Assessments take arrays, settings and a movements callable, never the project file.

May import: `settle.errors`, `settle.inputs` and `settle.engine`. Never a monitoring or run module, and never
`gis_out`.
"""
