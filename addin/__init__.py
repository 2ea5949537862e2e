"""rootvar.addin: spreadsheet functions, workbook reading/writing and the command line."""
