"""The terminal screens: desk, frame, terms, themes, compare; and the modal dialogs they open."""
