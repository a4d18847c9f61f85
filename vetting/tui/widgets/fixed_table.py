"""A DataTable whose columns all have a set width: new rows are not measured.

After rows are added, Textual's DataTable measures every cell of every new row to widen columns
that size themselves to their content. Columns given a width never use that measure, yet it is
taken anyway: at 10,000 ranked instruments (15 cells a row) about 150,000 measurements, several
seconds of the interface thread. This table skips the measuring when every column has a set
width and the new rows have no labels and a fixed height (what the screens here add), and
otherwise does exactly what DataTable does. It looks and behaves the same.
"""

from __future__ import annotations

from collections.abc import Iterable

from textual.geometry import Size
from textual.widgets import DataTable
from textual.widgets.data_table import RowKey


class FixedTable(DataTable):
    def _update_dimensions(self, new_rows: Iterable[RowKey]) -> None:
        new_rows = list(new_rows)
        rows = self.rows
        if any(column.auto_width for column in self.columns.values()) or any(
            rows[key].label is not None or rows[key].auto_height for key in new_rows if key in rows
        ):
            super()._update_dimensions(new_rows)
            return
        data_cells_width = sum(column.get_render_width(self) for column in self.columns.values())
        header_height = self.header_height if self.show_header else 0
        self.virtual_size = Size(data_cells_width + self._row_label_column_width,
                                 self._total_row_height + header_height)


__all__ = ["FixedTable"]
