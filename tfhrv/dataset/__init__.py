"""The labelled layer: the output schema (every group, variable, unit and flag declared once),
building the DataTree from the record pipeline's results, and reading/writing NetCDF.
"""
