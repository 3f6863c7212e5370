"""The bundled example study (an invented scenario); ``twofold example`` copies it and runs it."""
