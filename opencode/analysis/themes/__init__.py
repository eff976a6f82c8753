"""Themes: NMF/LDA, coherence, stability, k search, study-level functions and rendering."""
