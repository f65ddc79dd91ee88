"""gis_out: GIS files from a settle run (GeoPackage layers, settlement contours).

It imports `settle`; `settle` never imports it.
"""
from .frames import frames
from .geopackage import OutputBusyError, OutputError, write_geopackage, write_text_atomic

__all__ = ["frames", "write_geopackage", "write_text_atomic", "OutputError", "OutputBusyError"]
