"""Tables: codes by banners, weights, significance tests, study-level functions and rendering."""
