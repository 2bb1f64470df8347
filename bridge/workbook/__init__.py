"""Layer 1: the workbook as the zip package and sheet XML it is; imports nothing else of trueband.

=====================  ==========================================================================
``package``            ``WorkbookPackage``: opening (and refusing) a file, its parts, shared strings
``save``               ``PackageChanges`` and the safe writer (temporary file, re-open, replace)
``cells``              ``MAX_ROW``, ``MAX_COLUMN`` and A1 references (the one home of the grid's limits)
``xml_text``           escaping and unescaping element text
``xml_form``           the regular form the fast patterns read; the pre-scan and parser path for irregular ones
``sheet_data``         the cell types (``Cell``, ``Formula``, ``ErrorValue``) and where ``<sheetData>`` lies
``sheet_read``         cells, dimension, used range, merged ranges
``sheet_columns``      the column-array reader (the fast bulk read)
``sheet_patch``        new values, formulas and styles for existing cells
``sheet_edit``         adding and removing cells and rows; ``<dimension>``
``shared_formulas``    translating a shared formula to each cell, and unsharing
=====================  ==========================================================================

Within the layer the imports go down this list's dependency order: ``cells``, ``xml_text`` →
``sheet_data`` → ``xml_form`` → ``sheet_read`` → ``sheet_columns``, ``sheet_patch`` → ``sheet_edit``,
``shared_formulas``; ``package`` uses ``xml_text`` and ``xml_form``, ``save`` uses ``package``.
"""
