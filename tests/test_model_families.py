"""What each model family promises about its fit, apart from the search that tunes it."""

from __future__ import annotations

import numpy as np
from sklearn import datasets as skdata
from sklearn.metrics import r2_score

from tunelab.data import prepare_frame
from tunelab.models import build_pipeline


def _svm_fit_quality(scale: float) -> tuple[float, np.ndarray]:
    # Open data shipped with scikit-learn: the diabetes table (442 rows, 10 numeric columns), whose
    # target is a disease-progression score of about 25-346.
    bunch = skdata.load_diabetes(as_frame=True)
    frame = bunch.frame.assign(target=bunch.frame["target"] * scale)
    dataset = prepare_frame(frame, "target", "regression")
    cardinality = dataset.cardinality
    pipeline = build_pipeline({"family": "svm", "svm.C": 1.0}, dataset.roles, cardinality, dataset.task)
    pipeline.fit(dataset.X.iloc[:330], dataset.y[:330])
    predicted = np.asarray(pipeline.predict(dataset.X.iloc[330:]))
    return float(r2_score(dataset.y[330:], predicted)), predicted


def test_support_vector_regression_fits_alike_whatever_the_targets_units():
    # SVR's epsilon and C are in the target's units; tunelab's SVR works on a standardised target,
    # so the same configuration fits a price in cents as it fits one in units.
    r2_units, in_units = _svm_fit_quality(1.0)
    r2_thousands, in_thousands = _svm_fit_quality(1000.0)
    assert abs(r2_units - r2_thousands) < 1e-9
    np.testing.assert_allclose(in_thousands, 1000.0 * in_units, rtol=1e-6)
    # On the raw score, C = 1 leaves the fit nearly flat: R² 0.14 on this split, and below zero with
    # the target in thousands (measured when this test was written); standardised, 0.52.
    assert r2_units > 0.4
