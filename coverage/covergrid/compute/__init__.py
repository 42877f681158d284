"""Pure numerics of coverage: grid, sensor, span, kernel, engine, metrics, summaries.

Nothing here reads a study file or writes a file: the functions take plain inputs (an
element set, an epoch and span, a grid, a sensor) and return arrays and xarray Datasets.
Importing this package loads nothing; import the modules themselves.
"""
