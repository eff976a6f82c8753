"""Drivers: terms that predict a closed-ended outcome, study-level functions and rendering."""
