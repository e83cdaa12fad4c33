"""Each command's answer, assembled as one typed result record (`records.Record`).

This layer sits above the numerical procedures (`harvester.analysis`) and below the report and
the command line: a command's function loads nothing but the case, calls the procedures, and
returns a record whose fields are its JSON keys in SI.  The report renders that record as a
table, CSV, JSON or design note through one column registry (`harvester.report.columns`).

To add a command:
1. write its record(s) here, one module per command, fields named with their SI unit suffix;
2. write the function that builds the record from a loaded case (progress callback optional);
3. register the displayed keys in `harvester.report.columns` and add a `show_…` view;
4. add the typer command in `harvester.cli`: parse, call, render, nothing else.
"""
