"""The main job against data from outside the project: searches on open datasets shipped in PyPI packages."""

from __future__ import annotations

import json

import pytest


@pytest.mark.slow
def test_breast_cancer_search_reaches_cv_roc_auc_of_0_99(cli, tmp_path):
    # scikit-learn's bundled breast-cancer data (sklearn.datasets.load_breast_cancer), 569 rows.
    # From memory: tuned models on this data sit around 0.99-0.995 cross-validated ROC AUC.
    from sklearn.datasets import load_breast_cancer

    bunch = load_breast_cancer(as_frame=True)
    frame = bunch.frame.rename(columns={"target": "malignant_or_benign"})
    data = tmp_path / "breast_cancer.csv"
    frame.to_csv(data, index=False)
    result = cli("run", str(data), "--target", "malignant_or_benign", "--budget", "60s",
                 "--store", str(tmp_path / "bc.db"), "--json", "--seed", "0")
    assert result.code == 0, result.err
    summary = json.loads(result.out)
    assert summary["metric"] == "roc_auc"
    assert summary["best_value"] >= 0.99
