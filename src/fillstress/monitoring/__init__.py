"""The observational method: field readings against the prediction.

`backanalysis` holds the pure back-analysis methods on settlement readings (Asaoka 1978,
the hyperbolic method of Tan 1971); `fit` scales the model's compressibility and cv to
the readings; `forecast` reruns the prediction with the fitted parameters; `command`
writes a monitoring results folder.
"""
from .backanalysis import AsaokaFit, HyperbolicFit, asaoka, hyperbolic, resample_equal

__all__ = ["AsaokaFit", "HyperbolicFit", "asaoka", "hyperbolic", "resample_equal"]
