"""Output formats: terminal tables, machine-readable dumps and, later, BOM files and netlists."""
