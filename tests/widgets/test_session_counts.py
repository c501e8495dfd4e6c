"""Histograms stay exact while the session reuses the kernel's sums and earlier counts."""

import numpy as np

from fxnet_widgets.widgets.binning import exact_sums
from fxnet_widgets.widgets.session import Session


def _straightforward_counts(emus, layer, neuron, edges):
    s = np.concatenate([exact_sums(e, layer)[:, neuron] for e in emus if e.n])
    # bins [edges[i], edges[i+1]) over integers (numpy's histogram with the last edge exclusive)
    counts, _ = np.histogram(s, bins=np.append(edges[:-1], edges[-1] - 0.5).astype(np.float64))
    return counts


def test_counts_equal_straightforward_histograms_over_a_run_of_changes(fruit_net, fruit_plan, belt_image,
                                                                      labelled_samples):  # fmt: skip
    codes, labels = labelled_samples
    s = Session(fruit_net, image=belt_image, samples=codes, labels=labels, plan=fruit_plan)
    seen_overflow = 0
    for acc_bits, table_bits in [(18, 12), (13, 12), (13, 10), (11, 10), (18, 12), (19, 9)]:
        s.plan = s.plan.replace(acc_bits=acc_bits, table_bits=table_bits, table_frac=table_bits - 4)
        r = s.result
        emus = [r.image.emulation, r.samples.emulation]
        for nr in r.neurons:
            want = _straightforward_counts(emus, nr.layer, nr.neuron, nr.edges)
            assert nr.counts.tolist() == want.tolist(), (acc_bits, table_bits, nr.label)
            assert int(nr.counts.sum()) == sum(e.n for e in emus)
            sums = np.concatenate([exact_sums(e, nr.layer)[:, nr.neuron] for e in emus])
            assert (nr.observed_min, nr.observed_max) == (int(sums.min()), int(sums.max()))
        seen_overflow += r.event_totals()["acc_overflow"]
    assert seen_overflow > 0  # exact sums and s_A differed somewhere
