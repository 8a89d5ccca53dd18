"""What people read: the terminal table, plots, certificates and workbooks.

Only this package formats numbers for people; the plotting and PDF
libraries are imported inside the functions that draw, so commands that do
not draw start fast.
"""
