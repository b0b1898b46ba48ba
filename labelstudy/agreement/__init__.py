"""Agreement and content-validity statistics (pure: numpy, pandas, scipy, krippendorff; no Flask, no SQL).

Data convention: judges in rows, items in columns, NaN = no answer (see :mod:`labelstudy.agreement._data`).
"""

from labelstudy.agreement._data import AgreementInputError, as_matrix, from_long, resolve_domain

__all__ = ["AgreementInputError", "as_matrix", "from_long", "resolve_domain"]
