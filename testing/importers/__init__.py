"""Files in: logger readings (CSV/XLSX) and AGS4. Parsers only — they never save anything."""
