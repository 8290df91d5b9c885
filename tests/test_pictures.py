"""Pictures of a result: what they recompute matches the result file, and without matplotlib a clear error."""

import json
import sys

import numpy as np
import pytest

from tdhf.deck import parse_deck
from tdhf.driver import run_deck
from tdhf.errors import InputError
from tdhf.pictures import densities, figures, first_order_functions, ground_state_of, real_axis
from tdhf.report.json_result import result_to_json

DECK = '[atom]\nelement = "He"\n[response]\nfrequencies = [0.0, 0.3]\nexcitations = 2\n'


@pytest.fixture(scope="module")
def helium_data():
    return json.loads(json.dumps(result_to_json(run_deck(parse_deck(DECK)))))


def test_the_recomputed_ground_state_is_the_result_files(helium_data):
    state = ground_state_of(helium_data)
    assert state.total_energy == helium_data["ground_state"]["total_energy"]  # same grid, same SCF: same bits


def test_densities_integrate_to_the_electron_count(helium_data):
    """Normalization (analytic): the integral of D(r) = sum q P^2 is N."""
    state = ground_state_of(helium_data)
    total = densities(state).curves[0]
    assert total.label == "total"
    assert float(np.sum(np.array(total.y) * state.grid.weights)) == pytest.approx(2.0, rel=1e-12)


def test_the_dense_curve_passes_through_the_results_values(helium_data):
    box = helium_data["polarizabilities"][0]["r_max"]
    assert box > helium_data["ground_state"]["r_max"]  # the lines made the run enlarge the box
    state = ground_state_of(helium_data, box)
    plot = real_axis(state, 1, helium_data, points=20)
    lines = [row["energy"] for row in helium_data["excitations"]]
    assert list(plot.poles[:2]) == pytest.approx(lines, rel=1e-9)  # the listed lines are poles of the curve
    assert plot.segments[0].x[0] == 0.0
    assert plot.segments[0].y[0] == pytest.approx(helium_data["polarizabilities"][0]["coupled"], rel=1e-10)
    assert plot.points.x == (0.0, 0.3)
    assert all(low < x < high for segment, low, high in zip(plot.segments[1:], plot.poles, plot.poles[1:])
               for x in segment.x)


def test_first_order_functions_are_refused_in_the_continuum(helium_data):
    state = ground_state_of(helium_data)
    assert len(first_order_functions(state, 1, 0.0).curves) == 1  # He: the single channel 1s -> p
    with pytest.raises(InputError, match="--frequency: 2 hartree must be in"):
        first_order_functions(state, 1, 2.0)


def test_every_picture_of_a_result_renders(helium_data):
    pytest.importorskip("matplotlib")
    from tdhf.report.plots import figure_bytes

    names = []
    for name, figure in figures(helium_data):
        names.append(name)
        assert figure_bytes(figure, "png")[:4] == b"\x89PNG"
    assert names == ["densities", "alpha_real_L1", "spectrum", "first_order_L1"]


def test_without_matplotlib_the_error_names_the_install_command(helium_data, monkeypatch):
    monkeypatch.setitem(sys.modules, "matplotlib", None)
    with pytest.raises(InputError, match=r"install it with: pip install 'tdhf\[plot\]'"):
        next(figures(helium_data))


def test_the_photoionization_picture_renders():
    """sigma(omega) of a [photoionization] result: total, velocity form, uncoupled and partials, in Mb and eV."""
    pytest.importorskip("matplotlib")
    from tdhf.report.plots import figure_bytes

    deck = '[atom]\nelement = "He"\n[photoionization]\nphoton_energies = [1.0, 1.5, 2.5]\nsum_rules = false\n'
    data = json.loads(json.dumps(result_to_json(run_deck(parse_deck(deck)))))
    pictures = dict(figures(data))
    assert list(pictures) == ["densities", "photoionization"]
    axes = pictures["photoionization"].axes[0]
    assert axes.get_xlabel() == "photon energy (eV)" and axes.get_ylabel() == "photoionization cross section (Mb)"
    assert figure_bytes(pictures["photoionization"], "png")[:4] == b"\x89PNG"
    figure_bytes(pictures["densities"], "png")
