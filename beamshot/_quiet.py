"""A context manager that silences numpy's RuntimeWarnings for all-NaN slices (expected here:
directions outside the photo are NaN by design)."""

import contextlib
import warnings

import numpy as np


@contextlib.contextmanager
def quiet_nan():
    with warnings.catch_warnings(), np.errstate(invalid="ignore", divide="ignore"):
        warnings.simplefilter("ignore", RuntimeWarning)
        yield
