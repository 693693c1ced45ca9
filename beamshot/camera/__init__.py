"""Camera models: response curves, exposure relations, flat field."""
