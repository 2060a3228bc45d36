"""Dense-matrix tools shared by the exact and generators engines (gate application, layer
content, closed forms of repeated blocks)."""
