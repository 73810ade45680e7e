"""``fillstress design``: a local page to move, raise, add and delete fill bodies and watch
Δσz answer (engine: layout edits by superposition; server: loopback HTTP with a token)."""
