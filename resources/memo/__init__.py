"""The memo texts: the cautions (a package only so the wheel carries these files)."""
