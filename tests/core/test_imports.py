"""Imports: scikit-learn MLPClassifier, plain arrays, .npz files; input-scale conversions."""

import warnings

import numpy as np
import pytest
from sklearn.exceptions import ConvergenceWarning
from sklearn.neural_network import MLPClassifier

from fxnet_widgets.core.fileio import FileFormatError
from fxnet_widgets.core.imports import from_arrays, from_sklearn, load_npz, save_npz
from fxnet_widgets.core.network import Network

CODES = np.random.default_rng(0).integers(0, 256, (400, 3))
SCALED = {"pow2": CODES / 256.0, "full": CODES / 255.0, "codes": CODES.astype(np.float64)}


def _fit(activation, n_classes, trained_on, seed=0):
    y = np.random.default_rng(seed + n_classes).integers(0, n_classes, len(CODES))
    model = MLPClassifier((4, 3), activation=activation, max_iter=15, random_state=seed)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        return model.fit(SCALED[trained_on], y)


def _softmax(z):
    e = np.exp(z - z.max(axis=1, keepdims=True))
    return e / e.sum(axis=1, keepdims=True)


@pytest.mark.parametrize("activation", ["logistic", "tanh", "relu", "identity"])
@pytest.mark.parametrize(("trained_on", "fold"), [("pow2", False), ("full", False), ("full", True), ("codes", False)])
def test_binary_outputs_equal_predict_proba(activation, trained_on, fold):
    model = _fit(activation, 2, trained_on)
    net = from_sklearn(model, trained_on=trained_on, fold=fold)
    want = {"pow2": "pow2", "full": "pow2" if fold else "full", "codes": "pow2"}[trained_on]
    assert net.input_scale == want
    assert net.layers[-1].activation == "sigmoid" and net.n_out == 1
    # sklearn docs (MLPClassifier.predict_proba): column 1 is the probability of classes_[1]
    np.testing.assert_allclose(
        net.predict(CODES)[:, 0], model.predict_proba(SCALED[trained_on])[:, 1], rtol=0, atol=1e-9
    )
    assert net.classes == ("0", "1")


@pytest.mark.parametrize("activation", ["logistic", "tanh", "relu", "identity"])
@pytest.mark.parametrize(("trained_on", "fold"), [("pow2", False), ("full", False), ("full", True), ("codes", False)])
def test_multiclass_softmax_of_outputs_equals_predict_proba(activation, trained_on, fold):
    model = _fit(activation, 3, trained_on)
    net = from_sklearn(model, trained_on=trained_on, fold=fold)
    x = SCALED[trained_on]
    assert net.layers[-1].activation == "identity" and net.n_out == 3
    out = net.predict(CODES)
    # sklearn's multi-class output is a softmax (sklearn docs, MLPClassifier out_activation_)
    np.testing.assert_allclose(_softmax(out), model.predict_proba(x), rtol=0, atol=1e-9)
    np.testing.assert_array_equal(model.classes_[net.decide(out)], model.predict(x))


def test_full_scale_fold_uses_the_kernel_factor():
    model = _fit("tanh", 2, "full")
    kept = from_sklearn(model, trained_on="full")
    folded = from_sklearn(model, trained_on="full", fold=True)
    # semantics.md: a full-scale network is folded as w * (2**bits / (2**bits - 1)) in float64
    np.testing.assert_array_equal(folded.layers[0].weights, kept.layers[0].weights * (256.0 / 255.0))
    np.testing.assert_array_equal(folded.layers[1].weights, kept.layers[1].weights)
    np.testing.assert_allclose(folded.predict(CODES), kept.predict(CODES), rtol=0, atol=1e-12)


def test_class_names_and_input_names_are_carried():
    model = _fit("relu", 2, "pow2")
    net = from_sklearn(model, classes=("other", "ripe"), input_names=("r", "g", "b"))
    assert net.classes == ("other", "ripe") and net.input_names == ("r", "g", "b")


def test_unfitted_and_multilabel_models_are_refused():
    with pytest.raises(
        TypeError, match=r"^model must be a fitted scikit-learn MLPClassifier, not MLPClassifier \(no coefs_\)$"
    ):
        from_sklearn(MLPClassifier())
    y = np.random.default_rng(1).integers(0, 2, (len(CODES), 3))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        multi = MLPClassifier((3,), max_iter=5, random_state=0).fit(SCALED["pow2"], y)
    with pytest.raises(
        ValueError,
        match=r"^model must be a binary or multi-class MLPClassifier, not one with 'logistic' output "
        r"and 3 outputs \(multi-label is not supported\)$",
    ):
        from_sklearn(multi)
    with pytest.raises(ValueError, match=r"^trained_on must be one of pow2, full, codes, not 'unit'$"):
        from_sklearn(_fit("relu", 2, "pow2"), trained_on="unit")


def test_arrays_in_either_layout():
    w1 = np.array([[1.0, -2.0, 0.5], [0.25, 0.0, -1.0]])
    a = from_arrays([w1, [[1.0, 2.0]]], [[0.1, 0.2], [0.3]], ["tanh", "sigmoid"])
    b = from_arrays([w1.T, [[1.0], [2.0]]], [[0.1, 0.2], [0.3]], ["tanh", "sigmoid"], layout="in_out")
    assert a == b and a.shape == (3, 2, 1)
    with pytest.raises(
        ValueError, match=r"^weights, biases and activations must have the same non-zero length, not 2, 1 and 2$"
    ):
        from_arrays([w1, [[1.0, 2.0]]], [[0.1, 0.2]], ["tanh", "sigmoid"])


def test_npz_round_trip_and_hand_written_file(tmp_path):
    net = Network.from_layers([([[1.0, -2.0, 0.5]], [0.25], "sigmoid")], classes=("other", "ripe"), threshold=0.4)
    save_npz(tmp_path / "net.npz", net)
    assert load_npz(tmp_path / "net.npz") == net
    # what the README tells a user of another framework to write
    np.savez(tmp_path / "hand.npz", weights_1=np.ones((2, 3)), bias_1=np.zeros(2), activation_1="relu",
             weights_2=np.ones((1, 2)), bias_2=np.zeros(1), activation_2="sigmoid", input_scale="full")  # fmt: skip
    hand = load_npz(tmp_path / "hand.npz")
    assert hand.shape == (3, 2, 1) and hand.input_scale == "full"
    assert [L.activation for L in hand.layers] == ["relu", "sigmoid"]


@pytest.mark.parametrize(
    ("arrays", "message"),
    [
        ({"weights_1": np.ones((1, 3)), "bias_1": np.zeros(1), "activation_1": "sigmoid", "extra": np.ones(1)},
         r"extra is not a network array \(known: weights_l, bias_l, activation_l, "
         r"input_bits, input_scale, input_names, classes, threshold\)"),
        ({"weights_1": np.ones((1, 3)), "bias_1": np.zeros(1)}, r"activation_1 is missing"),
        ({"weights_2": np.ones((1, 3)), "bias_2": np.zeros(1), "activation_2": "relu"},
         r"layer 1 is missing \(weights_1\)"),
        ({"weights_1": np.ones((1, 3)), "bias_1": np.zeros(1), "activation_1": "softmax"},
         r"activation_1 must be one of sigmoid, tanh, relu, identity, not 'softmax'"),
        ({"weights_1": np.ones((1, 3)), "bias_1": np.zeros(2), "activation_1": "sigmoid"},
         r"layers\[0\]\.bias must have 1 entries \(one per neuron\), not 2"),
        ({}, r"no layers \(weights_1, bias_1, activation_1 are missing\)"),
    ],
)  # fmt: skip
def test_npz_errors_name_the_file(tmp_path, arrays, message):
    np.savez(tmp_path / "bad.npz", **arrays)
    with pytest.raises(ValueError, match=rf"^.*bad\.npz: {message}$"):
        load_npz(tmp_path / "bad.npz")


def test_npz_that_is_not_an_archive(tmp_path):
    (tmp_path / "junk.npz").write_bytes(b"PK\x03\x04 not really")
    with pytest.raises(FileFormatError, match=r"^.*junk\.npz: not a readable \.npz archive \(.+\)$"):
        load_npz(tmp_path / "junk.npz")
    with pytest.raises(FileFormatError, match=r"^.*none\.npz: no such file$"):
        load_npz(tmp_path / "none.npz")
