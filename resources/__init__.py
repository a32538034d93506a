"""Files Tenure reads at run time: the demo fleet, the memo cautions and the window icon.

``resources/`` stays at the top of the repository, where people look for the demo data
and the cautions text, and it is also an importable package so the same files ship inside
the wheel (``[tool.setuptools.package-data]`` in ``pyproject.toml`` lists them) and inside
the standalone bundle. Code never builds a path to them from ``__file__``; it reads them
with :mod:`importlib.resources`, which works the same from a source checkout, an installed
wheel and a frozen bundle::

    from importlib.resources import files
    text = files("resources").joinpath("memo", "cautions.txt").read_text(encoding="utf-8")

- ``demo/``: the demo fleet (``fleet.json``, ``cost_history.csv``, ``resale_quotes.csv``);
- ``memo/cautions.txt``: the one copy of the cautions (docs/method.md §9);
- ``icons/tenure.png``: the window and launcher icon.

``screenshots/`` holds the README's pictures only and is not packaged.
"""
