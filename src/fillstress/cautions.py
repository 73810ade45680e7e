"""The caution every output of fillstress carries, in one place (imported by every layer,
so it imports nothing)."""
from __future__ import annotations

#: The words that show a text already carries the core caution.
CHECKED_BY = "licensed geotechnical engineer"

#: The core caution: who must check the results, and what governs.
CORE_CAUTION = f"Results are for checking by a {CHECKED_BY}; local codes and regulations govern."
