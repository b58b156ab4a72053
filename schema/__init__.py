"""The submission contract: its files, units, GWP values, the database schema and indicator definitions."""
