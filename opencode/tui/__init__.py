"""The terminal coding desk (Textual): thin screens over opencode.coding and the study's queries."""
