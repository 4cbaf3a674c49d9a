"""The law heat map names signal values on its state axis, never bare row indices."""

import matplotlib

matplotlib.use("Agg")

import numpy as np
from scipy import stats

import switchlaw as sl


def test_poisson_receptor_heat_map_labels_are_signal_values():
    # A Poisson receptor with gain 4 senses counts 0, 1, 2, ...; each count stands for the signal
    # value count / gain (the receptor's estimate), so the label of row k must be k / 4, not k.
    def environment(rho):
        return sl.continuous_signal(stats.uniform(loc=0, scale=8), np.linspace(0, 8, 9),
                                    receptor=sl.PoissonReceptor(4.0))

    def payoff(env):
        return np.column_stack([env.values, 4 - env.values])

    law = sl.derive_law(payoff, environment, densities=np.linspace(0, 1, 3), beta=2.0, phenotypes=["a", "b"])
    assert law.states.size > 20  # many sensed counts: the case that used to show row indices
    heat, _ = sl.plot_law(law)
    rows = heat.get_yticks().round().astype(int)
    labels = [t.get_text() for t in heat.get_yticklabels()]
    assert 2 <= len(rows) <= 10
    assert labels == [f"{law.state_values[k]:.3g}" for k in rows]
    assert labels[-1] != str(rows[-1])  # count / gain, not the count's index
    assert heat.get_ylabel() == "sensed signal value y"
    matplotlib.pyplot.close("all")
