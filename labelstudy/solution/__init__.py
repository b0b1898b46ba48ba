"""Import an exploratory factor analysis (EFA) solution and diagnose it before labelling.

A solution is four tables: ``items`` (item id, text, one loading column per factor, optional
reverse-keyed flag and extras such as h2/u2/com), ``factors`` (id, name, definition), ``phi`` (factor
correlations, optional) and ``meta`` (key/value, optional). They come as an .xlsx workbook, a .json file,
CSV/TSV files, or a folder of CSV files; see :func:`load_solution`. Every problem with a file is a
:class:`~labelstudy.errors.SolutionImportError` that names the file, the row and the column.
"""

from labelstudy.solution.diagnose import (FACTOR_FLAGS, ITEM_FLAGS, Diagnosis, Thresholds, diagnose)
from labelstudy.solution.loader import MAX_UPLOAD_BYTES, load_solution, read_solution_bytes
from labelstudy.solution.model import Factor, Item, Solution

__all__ = ["Item", "Factor", "Solution", "load_solution", "read_solution_bytes", "Thresholds",
           "Diagnosis", "diagnose", "ITEM_FLAGS", "FACTOR_FLAGS", "MAX_UPLOAD_BYTES"]
