"""Files out: AGS4 and spreadsheet tables. Readers only — they never change a record."""
