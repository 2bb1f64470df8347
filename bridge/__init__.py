"""trueband's ways in: the command line, the workbook processor and the HTTP bridge.

Every adapter here reads the function registry of :mod:`trueband.funcs`;
none knows any single function.
"""
