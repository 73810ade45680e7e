"""The site model: its file schema, the validated configuration and the model built from it."""
