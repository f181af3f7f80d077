"""Timoshenko mode shapes, node positions, the second spectrum and the shear coefficient of bars.

References, each computed in this file and never by calling the code under test:

* ``fe_modes``: an independent Timoshenko beam finite-element solution written
  here: 3-node (quadratic Lagrange) elements for the deflection ``w`` and the
  rotation ``psi``, consistent mass with rotary inertia ``rho I``, 3-point
  Gauss for bending and mass and 2-point (reduced) Gauss for shear, which
  keeps a thin element from locking (common practice, e.g. Hughes, *The
  Finite Element Method*, ch. 5, from memory); eigenvectors from
  scipy.linalg.eigh normalised to ``v.T M v = bar mass``.  Not synth's bar_fe
  (a 2-node interdependent-interpolation element).
* the pinned-pinned closed form: ``w = c sin(n pi x / L)``, ``psi = c P
  cos(n pi x / L)`` with ``P = (k**2 - rho omega**2 / kappa G) / k`` (from
  ``psi' = w'' + rho omega**2 w / kappa G``, the first Timoshenko equation;
  Han, Benaroya & Wei 1999, J. Sound Vib. 225:935), and ``c**2 (1 + r**2
  P**2) / 2 = 1`` for a modal mass equal to the bar's mass;
* the cut-off ``f_c = sqrt(kappa G A / (rho I)) / 2 pi`` (the brief; Han et al. 1999);
* Cowper 1966 (J. Appl. Mech. 33:335-340): ``10 (1 + nu) / (12 + 11 nu)``
  (rectangle) and ``6 (1 + nu) / (7 + 6 nu)`` (solid circle), by hand.
"""
from __future__ import annotations

import math
import textwrap
from dataclasses import replace

import numpy as np
import pytest
import scipy.linalg

from synth import PatchError, patch_from_text
from synth.resonators.bar import BarSpec, bar_modes, count_below, solve, timoshenko_pinned_frequencies

# A thick maple-like bar, h / L = 0.1 (USDA values as in synth's materials table; G = E / 12.5).
MAPLE = dict(density=706.0, youngs_modulus=12.6e9, shear_modulus=12.6e9 / 12.5, poisson_ratio=0.42)
SUPPORTS = ("free-free", "clamped-free", "pinned-pinned", "clamped-clamped")
KAPPA = 5.0 / 6.0


def _thick(supports="free-free", **values):
    base = dict(length=0.3, width=0.04, thickness=0.03, supports=supports, theory="timoshenko", **MAPLE)
    base.update(values)
    return BarSpec(**base)


# --------------------------------------------------------------------------
# The independent finite-element reference.

_G3 = np.polynomial.legendre.leggauss(3)
_G2 = np.polynomial.legendre.leggauss(2)


def _quadratic(s):
    """Quadratic Lagrange functions on [-1, 1] (nodes -1, 0, 1) and their s-derivatives."""
    n = np.stack([0.5 * s * (s - 1.0), 1.0 - s * s, 0.5 * s * (s + 1.0)], axis=-1)
    d = np.stack([s - 0.5, -2.0 * s, s + 0.5], axis=-1)
    return n, d


def fe_modes(spec, n_modes, n_elements=240):
    """(frequency Hz, w at the FE nodes (2E+1, n), node x, rotation) of a uniform Timoshenko bar."""
    length, h, b = spec.length, spec.thickness, spec.width
    area, inertia = b * h, b * h**3 / 12.0
    ei, kga = spec.youngs_modulus * inertia, KAPPA * spec.shear_modulus * area
    rho = spec.density
    n_nodes = 2 * n_elements + 1
    size = 2 * n_nodes  # (w, psi) per node
    k_glob, m_glob = np.zeros((size, size)), np.zeros((size, size))
    le = length / n_elements
    jac = le / 2.0
    for e in range(n_elements):
        nodes = 2 * e + np.arange(3)
        w_dof, p_dof = 2 * nodes, 2 * nodes + 1
        dofs = np.concatenate([w_dof, p_dof])
        k_e, m_e = np.zeros((6, 6)), np.zeros((6, 6))
        for s, wt in zip(*_G3):
            n, d = _quadratic(s)
            dx = d / jac
            bend = np.concatenate([np.zeros(3), dx])
            k_e += wt * jac * ei * np.outer(bend, bend)
            nw, npsi = np.concatenate([n, np.zeros(3)]), np.concatenate([np.zeros(3), n])
            m_e += wt * jac * rho * (area * np.outer(nw, nw) + inertia * np.outer(npsi, npsi))
        for s, wt in zip(*_G2):
            n, d = _quadratic(s)
            strain = np.concatenate([d / jac, -n])  # w' - psi
            k_e += wt * jac * kga * np.outer(strain, strain)
        k_glob[np.ix_(dofs, dofs)] += k_e
        m_glob[np.ix_(dofs, dofs)] += m_e
    fixed = []
    for end, node in zip(spec.supports.split("-"), (0, n_nodes - 1)):
        fixed += {"free": [], "pinned": [2 * node], "clamped": [2 * node, 2 * node + 1]}[end]
    keep = np.setdiff1d(np.arange(size), fixed)
    k, m = k_glob[np.ix_(keep, keep)], m_glob[np.ix_(keep, keep)]
    rigid = 2 if spec.supports == "free-free" else 0
    shift = (math.pi / length) ** 4 * ei / (rho * area)
    lam, vec = scipy.linalg.eigh(k + shift * m, m, subset_by_index=[0, n_modes + rigid - 1])
    lam, vec = lam[rigid:] - shift, vec[:, rigid:]
    full = np.zeros((size, vec.shape[1]))
    full[keep] = vec * math.sqrt(rho * area * length)  # v.T M v = the bar's mass
    return np.sqrt(lam) / (2.0 * math.pi), full[0::2], np.linspace(0.0, length, n_nodes), full[1::2]


def _fe_nodes(w, x, length):
    """Interior zeros of each FE mode (fractions of the length), by linear interpolation on the FE nodes."""
    out = []
    for m in range(w.shape[1]):
        v = w[1:-1, m]
        xi = x[1:-1] / length
        i = np.flatnonzero(v[:-1] * v[1:] < 0.0)
        out.append(xi[i] + (xi[i + 1] - xi[i]) * v[i] / (v[i] - v[i + 1]))
    return out


# --------------------------------------------------------------------------
# Shapes and node positions against the independent FE.


class TestAgainstFiniteElements:
    @pytest.mark.parametrize("supports", SUPPORTS)
    def test_nodes_of_a_thick_bar(self, supports):
        # h / L = 0.1: first 6 modes' nodes within 1e-4 L of the fine FE (the issue: thin-bar shapes
        # put them up to 0.0094 L off).
        spec = _thick(supports)
        modes = solve(spec, 6)
        fe_hz, w, x, _ = fe_modes(spec, 6)
        np.testing.assert_allclose(modes.frequency_hz[:6], fe_hz, rtol=2e-5)
        for k, expected in enumerate(_fe_nodes(w, x, spec.length)):
            reported = np.array(modes.columns["node_positions"][k])
            interior = reported[(reported > 0.0) & (reported < 1.0)]
            np.testing.assert_allclose(interior, expected, atol=1e-4)

    @pytest.mark.parametrize("supports", SUPPORTS)
    def test_shapes_on_the_modal_mass_with_rotary_inertia(self, supports):
        # Deflections at points along the bar, both normalised to modal mass = bar mass (rho A w^2 + rho I psi^2).
        spec = _thick(supports)
        fe_hz, w, x, _ = fe_modes(spec, 6)
        for index in (10, 77, 160, 241, 333, 420):
            xi = x[index] / spec.length
            got = bar_modes(spec, excitation_position=xi, pickup_position=None, n_modes=6).excitation_shape[:6]
            np.testing.assert_allclose(np.abs(got), np.abs(w[index]), atol=2e-4 * np.max(np.abs(w)))

    def test_thin_bar_shapes_would_misplace_the_nodes(self):
        # The check above has teeth: thin-bar theory moves a thick free-free bar's nodes by > 1e-3 L.
        spec = _thick()
        thin = solve(replace(spec, theory="euler-bernoulli"), 6)
        _, w, x, _ = fe_modes(spec, 6)
        worst = max(np.max(np.abs(np.array(thin.columns["node_positions"][k]) - e))
                    for k, e in enumerate(_fe_nodes(w, x, spec.length)))
        assert worst > 1e-3


class TestPinnedClosedForm:
    def test_shapes_are_exactly_sines(self):
        # Han, Benaroya & Wei 1999: w = c sin(n pi x / L) on either spectrum; c from the modal mass (module doc).
        spec = _thick("pinned-pinned", thickness=0.06)
        modes = solve(spec, 12)
        xi = np.linspace(0.0, 1.0, 301)
        shape = np.array([bar_modes(spec, excitation_position=v, pickup_position=None, n_modes=12).excitation_shape
                          for v in xi])
        r2 = spec.thickness**2 / 12.0
        for m, (label, f) in enumerate(zip(modes.labels, modes.frequency_hz)):
            n = len(modes.columns["node_positions"][m]) - 1  # half-waves: nodes with both ends, less one
            k = n * math.pi / spec.length
            p = (k * k - spec.density * (2 * math.pi * f) ** 2 / (KAPPA * spec.shear_modulus)) / k
            c = math.sqrt(2.0 / (1.0 + r2 * p * p))
            expected = c * np.sin(n * math.pi * xi)
            np.testing.assert_allclose(np.abs(shape[:, m]), np.abs(expected), atol=1e-9)
            assert (p > 0) == label.startswith("B")  # first spectrum: psi turns with the slope


# --------------------------------------------------------------------------
# Second spectrum: one rule for every support.


class TestSecondSpectrum:
    def test_cutoff_reported(self):
        spec = _thick()
        got = solve(spec, 4).parameters["shear_cutoff_hz"]
        r2 = spec.thickness**2 / 12.0  # I / A of a rectangle
        assert got == pytest.approx(math.sqrt(KAPPA * spec.shear_modulus / (spec.density * r2)) / (2 * math.pi),
                                    rel=1e-12)

    @pytest.mark.parametrize("supports", SUPPORTS)
    def test_labels_follow_the_fe_classification(self, supports):
        # A very thick bar (h / L = 0.2): S modes below 60 kHz.  The FE here labels a mode S when its
        # cross-sections turn against the slope (integral w' psi dx < 0); frequencies and labels agree.
        spec = _thick(supports, thickness=0.06)
        modes = solve(spec, 14)
        n = min(len(modes.frequency_hz), 12)
        fe_hz, w, x, psi = fe_modes(spec, n + (1 if supports == "pinned-pinned" else 0), n_elements=200)
        slope = np.gradient(w, x, axis=0)
        moving = np.max(np.abs(w), axis=0) > 1e-6 * np.max(np.abs(w))  # pinned-pinned's uniform rotation: w = 0
        fe_hz, bending = fe_hz[moving][:n], (np.trapezoid(slope * psi, x, axis=0) > 0)[moving][:n]
        np.testing.assert_allclose(modes.frequency_hz[:n], fe_hz, rtol=1e-4)
        assert [label[0] for label in modes.labels[:n]] == ["B" if b else "S" for b in bending]
        assert any(label.startswith("S") for label in modes.labels[:n])
        cutoff = modes.parameters["shear_cutoff_hz"]
        assert all(f > cutoff for f, label in zip(modes.frequency_hz, modes.labels) if label.startswith("S"))

    @pytest.mark.parametrize("supports", SUPPORTS)
    def test_shear_modes_have_no_thin_bar_shift(self, supports):
        modes = solve(_thick(supports, thickness=0.06), 14)
        shift = modes.columns["timoshenko_shift_cents"]
        assert all((s is None) == label.startswith("S") for s, label in zip(shift, modes.labels))

    @pytest.mark.parametrize("supports", SUPPORTS)
    @pytest.mark.parametrize("thickness", [0.03, 0.06])
    def test_count_below_matches_the_modes_listed(self, supports, thickness):
        spec = _thick(supports, thickness=thickness)
        listed = solve(spec, 200).frequency_hz
        for limit in (8e3, 20e3, 40e3):
            actual = int(np.count_nonzero(listed < limit))
            assert count_below(spec, limit) == actual, (limit, count_below(spec, limit), actual)

    def test_pinned_pinned_bending_modes_unchanged(self):
        # Thin and thick: the B modes are the lower roots of the quadratic, as before (< 1e-6 cent).
        for thickness in (0.003, 0.03, 0.06):
            spec = _thick("pinned-pinned", thickness=thickness)
            modes = solve(spec, 30)
            bending = modes.frequency_hz[[label.startswith("B") for label in modes.labels]]
            lower = timoshenko_pinned_frequencies(len(bending), length=spec.length, radius_of_gyration=thickness / math.sqrt(12),
                                                  youngs_modulus=spec.youngs_modulus, shear_modulus=spec.shear_modulus,
                                                  kappa=KAPPA, density=spec.density)
            np.testing.assert_allclose(1200 * np.log2(bending / lower), 0.0, atol=1e-6)


# --------------------------------------------------------------------------
# Shear coefficient.

PATCH = """\
    name: kappa
    resonator: {{type: bar, material: {material}, length: 300 mm, {section}{extra}}}
    excitation: {{type: strike, position: 0.4}}
    render: {{sample_rate: 16000}}
    """


def _patch(extra="", material="maple", section="width: 40 mm, thickness: 18 mm"):
    return patch_from_text(textwrap.dedent(PATCH.format(material=material, section=section, extra=extra)))


def _kappa(**kw):
    import synth

    return synth.mode_set(_patch(**kw)).parameters["shear_coefficient"]


class TestShearCoefficient:
    def test_default_is_unchanged(self):
        assert _kappa() == 5.0 / 6.0
        # a round rod keeps Cowper's circle value by default: nu = 0.42 (maple): 6 x 1.42 / (7 + 2.52)
        assert _kappa(section="diameter: 20 mm") == pytest.approx(8.52 / 9.52, rel=1e-12)

    def test_cowper_by_hand(self):
        # Cowper 1966: rectangle 10 (1 + nu) / (12 + 11 nu); maple nu = 0.42: 14.2 / 16.62 = 0.854392...
        assert _kappa(extra=", shear_coefficient: cowper") == pytest.approx(14.2 / 16.62, rel=1e-12)
        # solid circle 6 (1 + nu) / (7 + 6 nu): 8.52 / 9.52 = 0.894958...
        assert _kappa(extra=", shear_coefficient: cowper", section="diameter: 20 mm") == pytest.approx(8.52 / 9.52)
        # steel-like nu = 0.3 by hand: 13 / 15.3 = 0.849673 and 7.8 / 8.8 = 0.886364
        from synth.resonators.bar import cowper_shear_coefficient

        assert cowper_shear_coefficient("rectangular", 0.3) == pytest.approx(0.849673, abs=1e-6)
        assert cowper_shear_coefficient("round", 0.3) == pytest.approx(0.886364, abs=1e-6)

    def test_five_sixths_and_a_number(self):
        assert _kappa(extra=", shear_coefficient: 5/6", section="diameter: 20 mm") == 5.0 / 6.0
        assert _kappa(extra=", shear_coefficient: 0.9") == 0.9

    def test_cowper_moves_a_wood_bar_b5(self):
        # The issue: about 10 cents on a wood bar's B5.  Maple 300 x 40 x 18 mm, free-free (measured: see report).
        import synth

        plain = synth.mode_set(_patch()).frequency_hz
        cowper = synth.mode_set(_patch(extra=", shear_coefficient: cowper")).frequency_hz
        cents = 1200 * np.log2(cowper[4] / plain[4])
        assert 5.0 < cents < 15.0

    @pytest.mark.parametrize("value", ["'5/7'", "shear", "1.5", "0", "-0.8", "true", ".nan"])
    def test_bad_value(self, value):
        with pytest.raises(PatchError, match=r"<text>:2: resonator\.shear_coefficient: must be 5/6, cowper or a number in \(0, 1\], got"):
            _patch(extra=f", shear_coefficient: {value}")
