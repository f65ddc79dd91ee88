"""Inputs: what the engineer gives, read and checked, handed on as plain dataclasses and arrays.

Holds the project file (`project_file.load_project`) and the tables it names: alignments and the route built from
them with its checks (`tables`, `route`), the ground (`ground`), building footprints (`footprints`), utility lines
(`utility_lines`) and monitoring readings (`readings`); the settings of each assessment with their defaults and
checks (`face_settings`, `building_settings`, `utility_settings`); and the published values that serve as defaults
(`published_defaults`). Every user mistake is an `InputError` naming the file, key or row.

May import: `settle.errors`, and modules of this package. Never an engine, assessment, monitoring or run module,
and never `gis_out`.
"""
