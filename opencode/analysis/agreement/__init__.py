"""Agreement between coders: statistics, study-level functions and rendering."""
