"""Worked recipes for computing mergeable summaries where the data live (they need the tools they use)."""
