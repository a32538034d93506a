"""The three sign-off roles of a memo and their signature field names (docs/method.md §8)."""

from __future__ import annotations

ROLES = ("prepared", "reviewed", "approved")
FIELD_NAMES = {"prepared": "Prepared", "reviewed": "Reviewed", "approved": "Approved"}
