"""The site service (`settle serve`): the project served to the site team on a web page and a JSON API, readings
posted daily into an SQLite store, the back-analysis and a fitted run redone after each post.

A front end, like the command line: it may import every layer of settle and gis_out (which writes the run folder
and creates the data folder); nothing in settle imports it.
"""
