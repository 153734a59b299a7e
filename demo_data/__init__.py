"""The bundled demo: a heated platen (case, layout, readings, truth)."""
