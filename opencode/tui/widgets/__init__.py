"""Small display widgets of the desk: the verbatim, the code frame list, side panels."""
