"""The fill: price sheets and trade logs in an exported workbook, filled with computed columns."""
