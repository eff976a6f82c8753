"""Bottom layer: atomic writes, the cell guard, masking, embedding, text tables, palette."""
