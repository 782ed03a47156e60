"""Data files in and out.

Reading (:mod:`.grids`, :mod:`.layout`): a workbook (.xlsx, .xlsm, .xls, .xlsb, .ods) or a text export
(.csv, .tsv, .txt) becomes grids of raw cell values with what the file says about them (hidden rows and
why, a table's totals row, formulas that aggregate their own column, formulas saved without a value,
error cells); the layout finds the header row, a units row, the columns asked for and the sheet that holds
them; the values are then read by :mod:`unbend.udfs.intake`, the same rules the cell functions use.
"""
from .grids import Book, Grid, ReadError, open_book
from .layout import DataReading, read_data

__all__ = ["Book", "Grid", "ReadError", "open_book", "DataReading", "read_data"]
