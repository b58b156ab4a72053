"""The invented demo intercomparison: its contract and a seeded generator of submissions."""
