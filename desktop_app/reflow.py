"""Two panes side by side when there is room, one above the other when there is not.

The editor shares the window with the register and the results; on a laptop
screen it gets 400-500 pixels, on a wide screen twice that.  A ``Reflow`` holds
two widgets and lays them out in a row while its width fits both at their
minimum widths, else in a column, so no field is cut off at either size.
"""

from __future__ import annotations

from PySide6.QtWidgets import QBoxLayout, QWidget


class Reflow(QWidget):
    """``first`` beside ``second`` when both fit, else ``first`` above ``second``."""

    def __init__(self, first: QWidget, second: QWidget, parent: QWidget | None = None,
                 spacing: int = 6) -> None:
        super().__init__(parent)
        self.first, self.second = first, second
        self.box = QBoxLayout(QBoxLayout.Direction.LeftToRight, self)
        self.box.setContentsMargins(0, 0, 0, 0)
        self.box.setSpacing(spacing)
        self.box.addWidget(first, 1)
        self.box.addWidget(second, 1)

    def row_width(self) -> int:
        """The width both panes need side by side."""
        return (self.first.minimumSizeHint().width() + self.second.minimumSizeHint().width()
                + self.box.spacing())

    def is_row(self) -> bool:
        return self.box.direction() == QBoxLayout.Direction.LeftToRight

    def minimumSizeHint(self):  # noqa: N802 - Qt's name
        hint = super().minimumSizeHint()
        if self.is_row():  # the column is always available: only the wider pane is needed
            hint.setWidth(max(self.first.minimumSizeHint().width(),
                              self.second.minimumSizeHint().width()))
        return hint

    def resizeEvent(self, event) -> None:  # noqa: N802 - Qt's name
        self.apply(event.size().width())
        super().resizeEvent(event)

    def apply(self, width: int) -> None:
        direction = (QBoxLayout.Direction.LeftToRight if width >= self.row_width()
                     else QBoxLayout.Direction.TopToBottom)
        if self.box.direction() != direction:
            self.box.setDirection(direction)
            self.updateGeometry()
