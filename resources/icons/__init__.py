"""The window and launcher icon (a package only so the wheel carries these files)."""
