"""CSV import with row-level errors, and exports of a plan. Nothing here plans anything."""

from review_alloc.io.cells import csv_text, safe_cell, write_csv
from review_alloc.io.export import export_plan_csv, plan_table, write_table
from review_alloc.io.importer import import_csv
from review_alloc.io.reading import FileSpec
from review_alloc.io.score_rows import SCORES
from review_alloc.io.signals import BIDS
from review_alloc.io.tables import CONFLICTS, PAPERS, REVIEWERS

__all__ = [
    "BIDS",
    "CONFLICTS",
    "PAPERS",
    "REVIEWERS",
    "SCORES",
    "FileSpec",
    "csv_text",
    "export_plan_csv",
    "import_csv",
    "plan_table",
    "safe_cell",
    "write_csv",
    "write_table",
]
