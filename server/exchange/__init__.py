"""Exchange formats: reading sample schedules from CSV, XLSX and AGS4 files (and, later,
writing results out). Pure of the database: readers turn bytes into a ``Schedule`` with
cell-level refusals, and the import service decides what that means for the stored record."""
