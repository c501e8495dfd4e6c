"""Training: determinism, input scaling, early stopping, activations, and real photographs."""

import numpy as np
import pytest
import skimage.data

from fxnet_widgets.core.labels import LabelledPixels, labels_from_mask
from fxnet_widgets.core.training import fit, train


def red_rule(img):
    """The stated colour rule: red exceeds both green and blue by more than 40 codes."""
    c = img.astype(np.int64)
    return (c[..., 0] > c[..., 1] + 40) & (c[..., 0] > c[..., 2] + 40)


def _random(n, seed):
    rng = np.random.default_rng(seed)
    codes = rng.integers(0, 256, (n, 3)).astype(np.uint8)
    return codes, red_rule(codes).astype(np.int64)


@pytest.mark.parametrize(("donor", "target"), [("astronaut", "coffee"), ("chelsea", "astronaut")])
def test_trained_on_one_photo_agrees_with_the_rule_on_another(donor, target):
    # skimage.data photographs: astronaut (NASA, public domain), coffee and chelsea (CC0),
    # as listed in the scikit-image data documentation; labels come from red_rule above.
    a = getattr(skimage.data, donor)()
    b = getattr(skimage.data, target)()
    mask = np.where(red_rule(a), 255, 0).astype(np.uint8)
    result = train(labels_from_mask(a, mask, classes=("other", "red")), n_samples=40_000, seed=0)
    net = result.network
    agreement = np.mean(net.decide(net.predict(b)).astype(bool) == red_rule(b))
    assert agreement >= 0.95


def test_same_seed_same_network_other_seed_other_network():
    codes, labels = _random(3000, 0)
    px = LabelledPixels(codes, labels, ("other", "red"))
    a = train(px, n_samples=2000, seed=1, max_epochs=5)
    b = train(px, n_samples=2000, seed=1, max_epochs=5)
    c = train(px, n_samples=2000, seed=2, max_epochs=5)
    assert a.network == b.network and a.report == b.report
    assert a.network != c.network


def test_inputs_use_the_contract_scale():
    # the returned network takes codes scaled by 2**-bits; a rule on codes is learnt as such
    codes, labels = _random(6000, 4)
    t = fit(codes[:5000], labels[:5000], codes[5000:], labels[5000:], classes=("other", "red"), seed=0)
    net = t.network
    assert net.input_scale == "pow2" and net.input_bits == 8
    assert net.input_names == ("red", "green", "blue")  # the network file default for 3 inputs
    h = 1 / (1 + np.exp(-(codes / 256.0 @ net.layers[0].weights.T + net.layers[0].bias)))
    o = 1 / (1 + np.exp(-(h @ net.layers[1].weights.T + net.layers[1].bias)))
    np.testing.assert_allclose(net.predict(codes), o, rtol=0, atol=1e-12)
    assert t.report.val_accuracy >= 0.97
    assert t.report.val_accuracy == np.mean(net.decide(net.predict(codes[5000:])) == labels[5000:])


def test_early_stopping_keeps_the_best_validation_epoch():
    codes, labels = _random(4000, 5)
    t = fit(codes[:3000], labels[:3000], codes[3000:], labels[3000:], classes=("a", "b"), patience=2,
            max_epochs=300, learning_rate=0.05)  # fmt: skip
    r = t.report
    assert r.stopped_early and r.epochs < 300
    assert r.epochs == r.best_epoch + 2
    assert r.val_loss[r.best_epoch - 1] == min(r.val_loss)
    assert len(r.train_loss) == len(r.val_loss) == r.epochs
    assert r.n_train == 3000 and r.n_val == 1000


@pytest.mark.parametrize("activation", ["tanh", "relu"])
def test_other_hidden_activations_learn(activation):
    codes, labels = _random(6000, 6)
    t = fit(codes[:5000], labels[:5000], codes[5000:], labels[5000:], classes=("a", "b"),
            activation=activation, hidden=(4,), seed=0)  # fmt: skip
    assert [L.activation for L in t.network.layers] == [activation, "sigmoid"]
    assert t.report.val_accuracy >= 0.95


def test_several_classes_give_identity_outputs_with_argmax_decisions():
    rng = np.random.default_rng(7)
    codes = rng.integers(0, 256, (6000, 3)).astype(np.uint8)
    labels = np.argmax(codes.astype(np.int64), axis=1)  # dominant channel
    t = fit(codes[:5000], labels[:5000], codes[5000:], labels[5000:], classes=("red", "green", "blue"),
            hidden=(6,), seed=0)  # fmt: skip
    net = t.network
    assert net.shape == (3, 6, 3) and net.layers[-1].activation == "identity"
    assert t.report.val_accuracy >= 0.9
    assert np.mean(net.decide(net.predict(codes[5000:])) == labels[5000:]) == t.report.val_accuracy


def test_hidden_layers_can_be_stacked_or_left_out():
    codes, labels = _random(2000, 8)
    deep = fit(codes, labels, codes, labels, classes=("a", "b"), hidden=(4, 3), max_epochs=3)
    flat = fit(codes, labels, codes, labels, classes=("a", "b"), hidden=(), max_epochs=3)
    assert deep.network.shape == (3, 4, 3, 1)
    assert flat.network.shape == (3, 1)


def test_bad_settings_are_errors():
    codes, labels = _random(100, 9)
    with pytest.raises(ValueError, match=r"^activation must be one of sigmoid, tanh, relu, not 'softmax'$"):
        fit(codes, labels, codes, labels, classes=("a", "b"), activation="softmax")
    with pytest.raises(ValueError, match=r"^training labels must be between 0 and 1, not 0\.\.2$"):
        fit(codes, labels * 2, codes, labels, classes=("a", "b"))
    with pytest.raises(ValueError, match=r"^hidden units must be integers between 1 and 4096, not 0$"):
        fit(codes, labels, codes, labels, classes=("a", "b"), hidden=0)
    with pytest.raises(TypeError, match=r"^training codes must be unsigned integer codes, not float64$"):
        fit(codes / 255, labels, codes, labels, classes=("a", "b"))
    with pytest.raises(TypeError, match=r"^data must be LabelledPixels or a PixelSplit, not ndarray$"):
        train(codes)
