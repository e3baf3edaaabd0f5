"""The tensor layer against scikit-learn's confusion_matrix and by hand."""

import numpy as np
import pandas as pd
import pytest
import xarray as xr
from hypothesis import given
from sklearn.metrics import confusion_matrix
from strategies import label_arrays

from foldcorr import InvalidInputError, InvalidTensorError, confusion_tensor, pool, tally
from foldcorr.tensor import tally_frame, validate_tensor
from foldcorr.testing import assert_tensor_equal


@given(label_arrays(folds=True))
def test_tally_equals_reference_confusion_matrix_per_fold(data):
    # Reference: sklearn.metrics.confusion_matrix with the same sorted labels, fold by fold.
    t = tally(data["truth"], data["pred"], folds=data["folds"])
    labels = t.coords["actual"].values
    assert labels.tolist() == sorted(set(data["truth"]) | set(data["pred"]))
    for fold in t.coords["fold"].values:
        keep = data["folds"] == fold
        ref = confusion_matrix(data["truth"][keep], data["pred"][keep], labels=labels)
        np.testing.assert_array_equal(t.sel(fold=fold).values, ref)
    np.testing.assert_array_equal(pool(t).values,
                                  confusion_matrix(data["truth"], data["pred"], labels=labels))


@given(label_arrays(weights=True))
def test_weighted_tally_equals_reference(data):
    # Reference: sklearn.metrics.confusion_matrix(sample_weight=...).
    t = tally(data["truth"], data["pred"], weights=data["weights"])
    assert t.dtype == np.float64
    ref = confusion_matrix(data["truth"], data["pred"], labels=t.coords["actual"].values,
                           sample_weight=data["weights"])
    np.testing.assert_allclose(t.values, ref, rtol=1e-12)


@given(label_arrays(folds=True))
def test_direct_integer_path_equals_hashing_path(data):
    # The no-hashing path for small integers must give what factorising the labels as text gives.
    fast = tally(data["truth"], data["pred"], folds=data["folds"])
    slow = tally(data["truth"].astype(str), data["pred"].astype(str), folds=data["folds"])
    np.testing.assert_array_equal(fast.values, slow.values)
    assert [str(c) for c in fast.coords["actual"].values] == sorted(
        slow.coords["actual"].values.tolist(), key=int)


def test_class_only_in_predictions_gets_a_row_of_zeros():
    t = tally(["a", "a", "b"], ["a", "c", "b"])
    assert t.coords["actual"].values.tolist() == ["a", "b", "c"]
    assert t.sel(actual="c").values.tolist() == [0, 0, 0]


def test_classes_never_seen_are_not_invented_on_the_direct_path():
    t = tally(np.array([0, 5, 5]), np.array([0, 5, 9]))
    assert t.coords["actual"].values.tolist() == [0, 5, 9]


def test_fixed_classes_keep_order_and_unseen_classes():
    t = tally(["b", "a"], ["b", "b"], classes=["c", "b", "a"])
    assert t.coords["predicted"].values.tolist() == ["c", "b", "a"]
    assert t.values.tolist() == [[0, 0, 0], [0, 1, 0], [0, 1, 0]]


def test_label_outside_fixed_classes_is_named():
    with pytest.raises(InvalidInputError, match=r"column 'pred' row 2: label 'z' is not among"):
        tally(["a", "b"], ["a", "z"], classes=["a", "b"])


def test_duplicate_fixed_classes_are_refused():
    with pytest.raises(InvalidInputError, match="lists 'a' more than once"):
        tally(["a"], ["a"], classes=["a", "a"])


def test_missing_label_names_column_and_row():
    with pytest.raises(InvalidInputError, match=r"column 'truth' row 2: missing label"):
        tally(np.array(["a", None, "b"], dtype=object), ["a", "b", "b"])
    with pytest.raises(InvalidInputError, match=r"column 'pred' row 3: missing label"):
        tally([1.0, 2.0, 1.0], [1.0, 2.0, np.nan])


def test_lengths_must_match():
    with pytest.raises(InvalidInputError, match="`pred` has 1 values but there are 2"):
        tally([1, 2], [1])


def test_bad_weights_are_refused():
    with pytest.raises(InvalidInputError, match=r"finite and non-negative; got -1.0 at row 2"):
        tally([1, 2], [1, 2], weights=[1.0, -1.0])


def test_categorical_labels_use_their_categories_in_order():
    truth = pd.Categorical(["low", "high", "mid"], categories=["low", "mid", "high", "never"])
    pred = pd.Categorical(["low", "mid", "mid"], categories=["low", "mid", "high", "never"])
    t = tally(truth, pred)
    assert t.coords["actual"].values.tolist() == ["low", "mid", "high"]
    assert t.values.tolist() == [[1, 0, 0], [0, 1, 0], [0, 1, 0]]


def test_boolean_labels():
    t = tally(np.array([True, False, True]), np.array([True, True, True]))
    assert t.coords["actual"].values.tolist() == [False, True]
    assert t.values.tolist() == [[0, 1], [0, 2]]


def test_mixed_label_types_still_tally():
    t = tally(np.array([1, "a"], dtype=object), np.array(["a", 1], dtype=object))
    assert sorted(map(str, t.coords["actual"].values)) == ["1", "a"]
    assert int(t.sum()) == 2


def test_tally_frame_by_mapping_names_the_dim():
    df = pd.DataFrame({"y": [0, 1, 1], "yhat": [0, 1, 0], "round": ["r2", "r1", "r2"]})
    t = tally_frame(df, truth="y", pred="yhat", by={"fold": "round"})
    assert t.dims == ("fold", "actual", "predicted")
    assert t.coords["fold"].values.tolist() == ["r1", "r2"]
    assert t.attrs["truth_column"] == "y" and t.attrs["n_rows"] == 3


def test_tally_frame_missing_column():
    with pytest.raises(InvalidInputError, match=r"column 'nope' not found"):
        tally_frame(pd.DataFrame({"actual": [1], "predicted": [1]}), truth="nope")


def test_counts_beyond_int32_are_kept_exactly():
    t = confusion_tensor(np.array([[3_000_000_000, 1], [2, 5_000_000_000]]), ["a", "b"])
    assert t.dtype == np.int64 and int(t.sum()) == 8_000_000_003


@pytest.mark.parametrize(
    "tensor, message",
    [
        ([[1, 2]], "must be an xarray.DataArray"),
        (xr.DataArray([[1, 2]], dims=("x", "predicted")), "missing \\['actual'\\]"),
        (xr.DataArray([[1, 2]], dims=("actual", "predicted")), "must be square"),
        (xr.DataArray([[1.0, np.nan], [0, 1]], dims=("actual", "predicted")), "must be finite"),
        (xr.DataArray([["a", "b"], ["c", "d"]], dims=("actual", "predicted")), "must be numeric"),
        (xr.DataArray([[1, 0], [0, 1]], dims=("actual", "predicted"),
                      coords={"actual": ["a", "b"], "predicted": ["b", "a"]}), "must be the same"),
        (xr.DataArray(np.zeros((0, 0), int), dims=("actual", "predicted")),
         "needs at least one class; got 0 actual by 0 predicted classes"),
        (xr.DataArray(np.zeros((3, 0, 0), int), dims=("fold", "actual", "predicted")),
         "needs at least one class"),
    ],
)
def test_validate_tensor_messages(tensor, message):
    with pytest.raises(InvalidTensorError, match=message):
        validate_tensor(tensor)


def test_validate_tensor_puts_class_dims_last():
    t = xr.DataArray(np.ones((2, 2, 3), dtype=int), dims=("actual", "predicted", "fold"))
    assert validate_tensor(t).dims == ("fold", "actual", "predicted")


def test_assert_tensor_equal_reports_differences():
    with pytest.raises(AssertionError, match="coordinate 'actual' differs"):
        assert_tensor_equal(tally(["a"], ["a"]), tally(["b"], ["b"]))


def test_integer_folds_with_gaps_keep_only_folds_that_occur():
    t = tally([0, 1, 1], [0, 1, 0], folds=[2, 2, 5])
    assert t.coords["fold"].values.tolist() == [2, 5]
    weighted = tally([0, 1, 1], [0, 1, 0], folds=[2, 2, 5], weights=[1.0, 0.0, 0.0])
    assert weighted.coords["fold"].values.tolist() == [2, 5]  # zero weight still occurs
    assert weighted.sel(fold=5).values.sum() == 0.0


def test_the_tensor_package_offers_every_public_name_of_its_modules():
    import foldcorr.tensor as tensor
    from foldcorr.tensor import backing, cells, counting, dims, joint, multilabel, samples

    for module in (dims, backing, cells, counting, joint, multilabel, samples):
        for name in module.__all__:
            assert getattr(tensor, name) is getattr(module, name), (module.__name__, name)
    assert sorted(tensor.__all__) == sorted(
        n for m in (dims, backing, cells, counting, joint, multilabel, samples) for n in m.__all__)
