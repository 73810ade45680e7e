"""The observational method: field readings against the prediction.

`backanalysis` holds the pure back-analysis methods on settlement readings (Asaoka 1978,
the hyperbolic method of Tan 1971); `fit` scales the model's compressibility and cv to
the readings; `forecast` reruns the prediction with the fitted parameters; `command`
writes a monitoring results folder.
"""
from .._lazy import lazy_getattr

# Loaded on first use: the command line reads monitoring.options to build its parser, and
# `fillstress --help` must not import numpy for it.
_LAZY = dict.fromkeys(["AsaokaFit", "HyperbolicFit", "asaoka", "hyperbolic", "resample_equal"],
                      "backanalysis")
__all__ = list(_LAZY)
__getattr__ = lazy_getattr(__name__, _LAZY, globals())
