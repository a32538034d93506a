"""The demo fleet source data (a package only so the wheel carries these files)."""
