"""Air loading, sealed cavities and porosity (auditor.physics.fluid and the modules of its
steps: added_mass, quadrature, radiation, cavity, coupled, porous; auditor.physics.materials).

Every check compares with something outside the project: a published result (named beside
it), a general-purpose reference library (scipy.special), or a fact of the trade (marked
"common practice").
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import special

from auditor.physics import added_mass, fluid, materials, membrane, quadrature, radiation
from auditor.physics.basis import CircleRegion, ModalBasis, RectangleRegion
from auditor.physics.cache import SolveCache

RHO = 1.204      # [kg/m³]
C = 343.0        # [m/s]


# --------------------------------------------------------------------------------------------
# Test bases
# --------------------------------------------------------------------------------------------

def _single_shape_basis(region, shape) -> ModalBasis:
    """A one-mode 'basis' holding an arbitrary shape (not normalised: the routine only
    integrates it)."""
    return ModalBasis(
        region=region,
        frequencies_hz=np.array([1.0]),
        labels=("#1",),
        multiplicity=np.ones(1, int),
        mean=np.zeros(1),
        nodal_lines=((),),
        evaluate=lambda points: shape(np.asarray(points, float))[:, None],
    )


def _rectangle(tension, density, width, length):
    return lambda f: membrane.rectangular_membrane_basis(tension, tension, density, width,
                                                         length, f)


RADIUS = 0.5
PISTON = _single_shape_basis(
    CircleRegion(RADIUS), lambda p: (np.hypot(p[:, 0], p[:, 1]) <= RADIUS).astype(float))
LAMB = _single_shape_basis(
    CircleRegion(RADIUS),
    lambda p: np.where(np.hypot(p[:, 0], p[:, 1]) <= RADIUS,
                       (1.0 - (p[:, 0] ** 2 + p[:, 1] ** 2) / RADIUS**2) ** 2, 0.0))


# --------------------------------------------------------------------------------------------
# Baffled half-space: published results
# --------------------------------------------------------------------------------------------

def test_piston_low_frequency_radiation_mass_and_resistance():
    # Baffled circular piston, ka ≪ 1: radiation mass (8/3) ρ0 a³ per side and radiation
    # resistance ρ0 c π a² (ka)²/2 (Kinsler, Frey, Coppens & Sanders, Fundamentals of
    # Acoustics, 4th ed., §7.5).
    mass = fluid.baffled_added_mass(PISTON, RHO)[0, 0]
    assert mass == pytest.approx(8.0 / 3.0 * RHO * RADIUS**3, rel=2e-3)
    ka = 0.05
    frequency = ka * C / (2 * np.pi * RADIUS)
    impedance = fluid.baffled_air_impedance(PISTON, frequency, air_density=RHO, speed_of_sound=C)
    assert impedance.resistance[0, 0] == pytest.approx(RHO * C * np.pi * RADIUS**2 * ka**2 / 2,
                                                       rel=3e-3)
    assert impedance.added_mass[0, 0] == pytest.approx(8.0 / 3.0 * RHO * RADIUS**3, rel=3e-3)


@pytest.mark.parametrize("ka", [0.5, 1.0, 2.0, 3.0])
def test_piston_impedance_at_any_ka(ka):
    # Exact baffled-piston impedance Z = ρ0cπa² [1 − J1(2ka)/(ka) + i H1(2ka)/(ka)] (Kinsler et
    # al., 4th ed., §7.5), with J1 and the Struve function H1 from scipy.special.
    frequency = ka * C / (2 * np.pi * RADIUS)
    impedance = fluid.baffled_air_impedance(PISTON, frequency, air_density=RHO, speed_of_sound=C)
    area = np.pi * RADIUS**2
    resistance = RHO * C * area * (1.0 - special.j1(2 * ka) / ka)
    reactance = RHO * C * area * special.struve(1, 2 * ka) / ka
    assert impedance.resistance[0, 0] == pytest.approx(resistance, rel=3e-3)
    assert 2 * np.pi * frequency * impedance.added_mass[0, 0] == pytest.approx(reactance, rel=3e-3)


def test_lamb_added_virtual_mass_factor():
    # Lamb's AVMI factor β = 0.6689 for the clamped circular plate's fundamental, Lamb's shape
    # (1 − r²/a²)², fluid on one side: f_wet = f_dry / √(1 + β ρ a/(ρ_plate h)), i.e. modal added
    # mass = β ρ a ∫φ² dA (H. Lamb, Proc. R. Soc. Lond. A 98, 1920). ∫φ² dA = π a²/5 exactly.
    added = fluid.baffled_added_mass(LAMB, RHO)[0, 0]
    beta = added / (RHO * RADIUS * np.pi * RADIUS**2 / 5.0)
    assert beta == pytest.approx(0.6689, abs=1.5e-3)


def test_unit_square_inverse_distance_integral():
    # ∬∬ dA dA'/|x − x'| over the unit square = 4 ln(1 + √2) − (4/3)(√2 − 1) ≈ 2.9732 (the
    # classical closed form for a square, from memory), through the point quadrature.
    square = _single_shape_basis(RectangleRegion(1.0, 1.0), lambda p: np.ones(len(p)))
    kernel = fluid.baffled_added_mass(square, 1.0)[0, 0] * 2 * np.pi
    assert kernel == pytest.approx(4 * math.log(1 + math.sqrt(2))
                                   - 4.0 / 3.0 * (math.sqrt(2) - 1), rel=2e-3)


def test_analytic_rectangle_and_disc_agree_with_point_quadrature():
    # The closed-form paths (sine correlations; Hankel transforms) against the general point
    # quadrature that the piston and Lamb checks above validate.
    for basis in (membrane.rectangular_membrane_basis(500, 300, 0.25, 1.2, 0.7, 60),
                  membrane.circular_membrane_basis(500, 0.25, 0.6, 70)):
        analytic = fluid.baffled_added_mass(basis, RHO)
        family = quadrature.point_shapes(basis, cells_target=4000)
        by_points = RHO * added_mass._points_added_mass_normalised(family) / (2 * np.pi)
        scale = np.max(np.abs(analytic))
        assert np.max(np.abs(analytic - by_points)) < 2e-3 * scale


@pytest.mark.parametrize("basis", [
    membrane.rectangular_membrane_basis(600, 400, 0.3, 1.5, 0.9, 90),
    membrane.circular_membrane_basis(600, 0.3, 0.5, 120),
])
def test_added_mass_is_symmetric_positive_definite(basis):
    # A kinetic energy: the added-mass matrix of a half-space is symmetric positive definite
    # (Rayleigh, The Theory of Sound, vol. II, §278: the energy of the motion is positive).
    added = fluid.baffled_added_mass(basis, RHO)
    assert np.allclose(added, added.T, rtol=0, atol=1e-12 * np.max(np.abs(added)))
    assert np.min(np.linalg.eigvalsh(added)) > 0
    # and it couples modes: some off-diagonal entries are not small.
    off = added - np.diag(np.diag(added))
    assert np.max(np.abs(off)) > 0.1 * np.max(np.diag(added))


# --------------------------------------------------------------------------------------------
# Loaded modes
# --------------------------------------------------------------------------------------------

def test_headline_film_fundamental_drops_by_more_than_half():
    # A 250 g/m² film 1.2 m × 1.2 m at 500 N/m with air on both sides: the air it moves
    # (about 4.7 times its own mass for the fundamental) brings the fundamental down by more
    # than a factor of two (DESIGN: "falls by a factor of two or more"; common practice for
    # stretched film). In vacuo f11 = ½ √(T/ρs) √2 / L (Rayleigh, §194) = 26.35 Hz.
    loaded = fluid.loaded_modes(_rectangle(500, 0.25, 1.2, 1.2), 0.25, fmax=40)
    f_vacuum = 0.5 * math.sqrt(500 / 0.25) * math.sqrt(2) / 1.2
    assert loaded.in_vacuo_hz[0] == pytest.approx(f_vacuum, rel=1e-12)
    ratio = loaded.frequencies_hz[0] / f_vacuum
    assert 0.36 < ratio < 0.5                      # computed: 0.415 (10.94 Hz)
    assert loaded.labels[0] == "(1,1)"
    assert loaded.participation[0] > 0.6           # 64/π⁴ = 0.657 in vacuo (DESIGN)


def test_radiation_loss_factor_of_a_compact_mode():
    # For a mode much smaller than the wavelength the modal radiation resistance per baffled
    # side is that of a compact source of volume velocity ∫ψ: R = ρ0 c k² (∫ψ dA)²/(2π)
    # (Kinsler et al., §7.5, the low-ka piston result written for any volume velocity);
    # η_rad = R/(ω M_total) with ω² M_total = ψᵀKψ.
    density = 0.25
    loaded = fluid.loaded_modes(_rectangle(500, density, 1.2, 1.2), density, fmax=20)
    q = loaded.vectors[:, 0]
    basis = loaded.basis
    area = 1.44
    omega = 2 * np.pi * loaded.frequencies_hz[0]
    k = omega / C
    volume = area * np.dot(q, basis.mean)
    resistance = 2 * RHO * C * k**2 * volume**2 / (2 * np.pi)
    total_mass = density * area * np.sum(q**2 * (2 * np.pi * basis.frequencies_hz) ** 2) / omega**2
    expected = resistance / (omega * total_mass)
    assert loaded.radiation_loss_factor[0] == pytest.approx(expected, rel=0.03)
    assert loaded.loss_factor[0] == pytest.approx(materials.DEFAULT_LOSS_FACTORS["film"]
                                                  + loaded.radiation_loss_factor[0], rel=1e-6)


def test_fundamental_converges_with_basis_size():
    # Convergence (numerical fact): the loaded fundamental settles as the in-vacuo basis
    # grows; successive differences shrink and fall below 0.5 %.
    basis_for = _rectangle(800, 0.2, 1.8, 1.1)
    results = []
    sizes = []
    for count in (12, 48, 192):
        loaded = fluid.loaded_modes(basis_for, 0.2, fmax=60, basis_extent=4.0, max_basis=count)
        results.append(loaded.frequencies_hz[0])
        sizes.append(len(loaded.basis))
    first, second = abs(results[1] / results[0] - 1), abs(results[2] / results[1] - 1)
    assert sizes == [12, 48, 192]
    assert second < first or second < 1e-6
    assert second < 0.005


def test_mass_air_mass_resonance_of_a_limp_panel():
    # A limp panel (very low tension) on a sealed cavity, nothing on the room side, resonates
    # at f0 = (1/2π) √(ρ0c²/(m d)) ≈ 60/√(m d) (common practice in building acoustics; 59.9
    # with 1.204 kg/m³ and 343 m/s). Clamped-edge modes only approach piston motion as the basis
    # grows (the edge layer shrinks like N^(−1/2)), so the resonance approaches f0 from below;
    # Richardson extrapolation in N^(−1/2) closes the gap.
    m, d, size = 5.0, 0.05, 1.2
    f0 = fluid.mass_air_mass_frequency(m, d)
    assert f0 == pytest.approx(60.0 / math.sqrt(m * d), rel=3e-3)
    estimates = []
    for count in (50, 200):
        def basis_for(f, count=count):
            return membrane.rectangular_membrane_basis(0.5, 0.5, m, size, size, math.inf,
                                                       max_modes=count)

        loaded = fluid.loaded_modes(basis_for, m, fmax=400, max_modes=count, room_side="none",
                                    plenum_side="sealed", cavity_depth=d, max_basis=count)
        piston = int(np.argmax(loaded.participation))
        assert loaded.labels[piston] == "(1,1)"
        estimates.append(loaded.frequencies_hz[piston])
    assert estimates[0] < estimates[1] < f0
    extrapolated = estimates[1] + (estimates[1] - estimates[0])      # N ratio 4: (1/2)/(1 − 1/2)
    assert extrapolated == pytest.approx(f0, rel=0.01)


def test_shallow_cavity_stiffness_is_the_uniform_pressure_spring():
    # Dowell's low-frequency limit: the uniform cavity mode adds the stiffness
    # ρ0c² (∫φp)(∫φq)/V (Dowell, Gorman & Smith, J. Sound Vib. 52, 1977), with ∫φ = A·mean
    # from the basis (mean = 8/(π² m n) for odd m, n; DESIGN).
    basis = membrane.rectangular_membrane_basis(500, 500, 0.25, 1.2, 0.8, 60)
    depth = 0.1
    stiffness, mass = fluid.cavity_dynamic_mass(basis, depth, 0.0)
    area = 1.2 * 0.8
    integral = area * basis.mean
    expected = RHO * C**2 * np.outer(integral, integral) / (area * depth)
    assert np.allclose(stiffness, expected, rtol=1e-9, atol=1e-9 * expected.max())
    assert np.min(np.linalg.eigvalsh(mass)) > -1e-12 * np.max(mass)


def test_deep_sealed_cavity_tends_to_a_rigid_duct():
    # As the depth grows the cross modes' pressure ρ0ω² coth(κd)/κ tends to ρ0ω²/κ: the load of
    # a semi-infinite rigid-walled duct of the panel's section (coth → 1; Morse & Ingard,
    # Theoretical Acoustics, 1968, ch. 9); modes of zero mean never feel the uniform-mode stiffness,
    # so their frequencies settle.
    basis_for = _rectangle(500, 0.25, 1.2, 0.9)
    settled = []
    for depth in (3.0, 30.0):
        loaded = fluid.loaded_modes(basis_for, 0.25, fmax=50, room_side="none",
                                    plenum_side="sealed", cavity_depth=depth)
        index = loaded.labels.index("(2,1)")
        assert loaded.participation[index] < 1e-12
        settled.append(loaded.frequencies_hz[index])
    assert settled[1] == pytest.approx(settled[0], rel=1e-4)
    # and the shallow cavity loads them far more (lateral flow, mass ρ0/(κ²d)): lower frequency
    shallow = fluid.loaded_modes(basis_for, 0.25, fmax=50, room_side="none",
                                 plenum_side="sealed", cavity_depth=0.05)
    assert shallow.frequencies_hz[shallow.labels.index("(2,1)")] < 0.8 * settled[1]


def test_a_square_names_its_mixed_degenerate_pairs_once_each():
    # A square membrane's (m, n) and (n, m) modes share one frequency (Rayleigh, The Theory
    # of Sound, vol. 1 ch. IX); loading mixes them evenly, and the two loaded modes of a
    # pair are named one each, (m, n) and (n, m) (common practice), never the same twice.
    # Porous fabric over a 40 mm sealed cavity, the demo's square ceiling panel.
    def basis_for(f_limit, max_modes=240):
        return membrane.rectangular_membrane_basis(600.0, 600.0, 0.25, 1.2, 1.2, f_limit,
                                                   max_modes=max_modes)

    loaded = fluid.loaded_modes(basis_for, 0.25, fmax=150.0, room_side="air",
                                plenum_side="sealed", cavity_depth=0.04, material="fabric",
                                airflow_resistance=700.0)
    names = list(loaded.labels)
    assert len(names) > 40
    assert len(set(names)) == len(names)
    pairs = [(m, n) for m, n in (tuple(int(v) for v in name.strip("()").split(","))
                                 for name in names) if m != n]
    assert sum((n, m) in pairs for m, n in pairs) >= 20   # both of many pairs present


def test_a_cavity_split_is_named_twice_and_told_apart():
    # A sealed cavity couples a membrane's axisymmetric modes through its uniform pressure
    # (Dowell, Gorman & Smith, J. Sound Vib. 52, 1977), and can split one panel mode in two
    # loaded modes that both have it as their largest part: the demo's 2.4 m film disc over a
    # 300 mm plenum gives two such modes of (0,5). Both keep the name, in ascending frequency
    # the plain one first and the second marked "b", so that the two can be told apart in a
    # finding, a shape drawing or a tap-test fit. Their in-vacuo frequency is that of (0,5):
    # f = j₀,₅ √(T/ρs)/(2πa), j₀,₅ = 14.9309177 (Abramowitz & Stegun, Table 9.5; the value
    # from memory, checked below against scipy.special.jn_zeros).
    tension, density, radius = 900.0, 0.23, 1.2

    def basis_for(f_limit, max_modes=240):
        return membrane.circular_membrane_basis(tension, density, radius, f_limit,
                                                max_modes=max_modes)

    loaded = fluid.loaded_modes(basis_for, density, fmax=120.0, room_side="air",
                                plenum_side="sealed", cavity_depth=0.3, material="film")
    names = list(loaded.labels)
    assert len(set(names)) == len(names)
    first, second = names.index("(0,5)"), names.index("(0,5)b")
    assert first < second
    assert loaded.dominant[first] == loaded.dominant[second]
    f05 = 14.9309177 * math.sqrt(tension / density) / (2 * math.pi * radius)
    assert loaded.in_vacuo_hz[[first, second]] == pytest.approx([f05, f05], rel=1e-7)
    assert special.jn_zeros(0, 5)[-1] == pytest.approx(14.9309177, rel=1e-8)


def test_names_of_modes_sharing_a_basis_mode_are_marked_in_frequency_order():
    # The convention of auditor.physics.basis.mode_names (ours, stated in Methods): the first
    # mode of a name keeps it, later ones are marked b, c, … in ascending frequency, wherever
    # they fall among the other modes.
    from auditor.physics.basis import mode_names

    labels = ("(1,1)", "(2,1)", "(1,2)")
    assert mode_names(labels, [0, 1, 0, 2, 0, 1]) == (
        "(1,1)", "(2,1)", "(1,1)b", "(1,2)", "(1,1)c", "(2,1)b")
    assert tuple(mode_names(labels, [2, 0, 1])) == ("(1,2)", "(1,1)", "(2,1)")


def test_porous_limits():
    # Series flow resistance, Z_eff = Z r/(Z + r) (U. Ingard, Notes on Acoustics, 2008): r → ∞
    # is the impervious sheet, r → 0 leaves the panel in vacuo with its structural damping.
    basis_for = _rectangle(500, 0.25, 1.2, 0.9)
    impervious = fluid.loaded_modes(basis_for, 0.25, fmax=60, material="fabric")
    vacuum = fluid.loaded_modes(basis_for, 0.25, fmax=60, room_side="none", plenum_side="none",
                                material="fabric")
    tight = fluid.loaded_modes(basis_for, 0.25, fmax=60, material="fabric", airflow_resistance=1e9)
    open_weave = fluid.loaded_modes(basis_for, 0.25, fmax=60, material="fabric",
                                    airflow_resistance=1e-4)
    k = 4
    assert np.allclose(tight.frequencies_hz[:k], impervious.frequencies_hz[:k], rtol=1e-5)
    assert np.allclose(tight.loss_factor[:k], impervious.loss_factor[:k], rtol=1e-3)
    assert np.allclose(open_weave.frequencies_hz[:k], vacuum.frequencies_hz[:k], rtol=1e-5)
    assert np.allclose(open_weave.loss_factor[:k], materials.DEFAULT_LOSS_FACTORS["fabric"],
                       rtol=1e-3)
    # In between, the flow through the weave dissipates: the loss factor exceeds the
    # structural one and the frequency lies between the two limits.
    middle = fluid.loaded_modes(basis_for, 0.25, fmax=60, material="fabric",
                                airflow_resistance=100.0)
    assert impervious.frequencies_hz[0] < middle.frequencies_hz[0] < vacuum.frequencies_hz[0]
    assert middle.loss_factor[0] > impervious.loss_factor[0] + 0.1


def test_open_mesh_without_resistance_carries_no_air():
    # A mesh with no airflow resistance given passes air freely (its open area): in-vacuo
    # modes and the structural loss factor (common practice for open mesh screens).
    basis_for = _rectangle(2000, 1.5, 1.0, 1.0)
    loaded = fluid.loaded_modes(basis_for, 1.5, fmax=200, material="mesh")
    basis = basis_for(200)
    assert np.allclose(loaded.frequencies_hz,
                       basis.frequencies_hz[basis.frequencies_hz <= 200][:60])
    assert np.allclose(loaded.loss_factor, materials.DEFAULT_LOSS_FACTORS["mesh"])
    assert "no air mass loading" in loaded.model


def test_vacuum_returns_the_basis_and_reports_its_model():
    basis_for = _rectangle(700, 0.3, 1.0, 0.6)
    loaded = fluid.loaded_modes(basis_for, 0.3, fmax=150, room_side="none", plenum_side="none")
    basis = basis_for(150)
    # Rectangular membrane f_mn = ½ √(T/ρs) √((m/Lx)² + (n/Ly)²) (Rayleigh, §194).
    expected = 0.5 * math.sqrt(700 / 0.3) * math.hypot(1 / 1.0, 1 / 0.6)
    assert loaded.frequencies_hz[0] == pytest.approx(expected, rel=1e-12)
    assert np.allclose(loaded.participation, basis.mean[: len(loaded)] ** 2)
    assert "In vacuo" in loaded.model


def test_circle_pairs_keep_their_multiplicity_and_air_lowers_every_mode():
    # Disc modes with nodal diameters are cos/sin pairs (Rayleigh, §200): the loaded mode keeps
    # multiplicity 2; air only adds mass on open sides, so every frequency falls.
    basis_for = lambda f: membrane.circular_membrane_basis(500, 0.25, 0.6, f)  # noqa: E731
    loaded = fluid.loaded_modes(basis_for, 0.25, fmax=60)
    assert loaded.labels[0] == "(0,1)" and loaded.multiplicity[0] == 1
    assert loaded.labels[1] == "(1,1)" and loaded.multiplicity[1] == 2
    assert np.all(loaded.frequencies_hz < loaded.in_vacuo_hz)
    assert np.allclose(np.sum(loaded.vectors**2, axis=0), 1.0)


def test_user_errors_are_clear_messages():
    basis_for = _rectangle(500, 0.25, 1.0, 1.0)
    with pytest.raises(fluid.LoadingInputError, match="cavity depth"):
        fluid.loaded_modes(basis_for, 0.25, fmax=50, plenum_side="sealed")
    with pytest.raises(fluid.LoadingInputError, match="airflow resistance"):
        fluid.loaded_modes(basis_for, 0.25, fmax=50, airflow_resistance=-1.0)
    with pytest.raises(fluid.LoadingInputError, match="room side"):
        fluid.loaded_modes(basis_for, 0.25, fmax=50, room_side="garden")
    with pytest.raises(fluid.LoadingInputError, match="areal density"):
        fluid.loaded_modes(basis_for, 0.0, fmax=50)
    with pytest.raises(fluid.LoadingInputError, match="material"):
        fluid.loaded_modes(basis_for, 0.25, fmax=50, material="glass")


# --------------------------------------------------------------------------------------------
# Materials
# --------------------------------------------------------------------------------------------

def test_structural_loss_factor_defaults_and_given_values():
    # Default loss factors lie in the ranges of common practice (film 0.02–0.05, fabric
    # 0.05–0.1, steel mesh 0.005–0.02, plate about 0.01; from memory).
    for material, (low, high) in materials.LOSS_FACTOR_RANGES.items():
        assert low <= materials.structural_loss_factor(material) <= high
    assert materials.structural_loss_factor(" Film ") == materials.DEFAULT_LOSS_FACTORS["film"]
    assert materials.structural_loss_factor("fabric", 0.12) == 0.12
    assert (materials.structural_loss_factor("plate", float("nan"))
            == materials.DEFAULT_LOSS_FACTORS["plate"])
    with pytest.raises(ValueError, match="unknown material"):
        materials.structural_loss_factor("timber")
    with pytest.raises(ValueError, match="between 0 and 1"):
        materials.structural_loss_factor("film", 1.5)


# --------------------------------------------------------------------------------------------
# Porous sheet over a sealed cavity, polygon outlines (finite-element bases)
# --------------------------------------------------------------------------------------------

def _polygon_basis(outline, tension, density, count):
    from auditor.physics import fem

    basis = fem.polygon_membrane_basis(outline, (), tension, tension, density, n_modes=count,
                                       accuracy="coarse")
    return lambda f: basis


def test_porous_sheet_over_sealed_cavity_lies_between_its_limits_on_a_trapezoid():
    # Series flow resistance, Z_eff = Z r/(Z + r) (U. Ingard, Notes on Acoustics, 2008): r → ∞
    # is the impervious sheet on its sealed cavity (Dowell, Gorman & Smith, J. Sound Vib. 52,
    # 1977), r → 0 the panel in vacuo with its structural damping. A passive panel has no
    # root at zero frequency and no negative loss factor, whatever r (common practice: a
    # loss factor is a ratio of dissipated to stored energy).
    basis_for = _polygon_basis([(0, 0), (1.2, 0), (0.9, 0.8), (0.3, 0.8)], 400.0, 0.2, 24)
    cache = SolveCache()   # the five solves share the air's integrals and the cavity's modes
    common = dict(fmax=80, room_side="air", plenum_side="sealed", cavity_depth=0.05,
                  material="fabric", cache=cache)
    eta = materials.DEFAULT_LOSS_FACTORS["fabric"]
    impervious = fluid.loaded_modes(basis_for, 0.2, **common)
    vacuum = fluid.loaded_modes(basis_for, 0.2, fmax=80, room_side="none", plenum_side="none",
                                material="fabric", cache=cache)
    tight = fluid.loaded_modes(basis_for, 0.2, airflow_resistance=1e7, **common)
    open_weave = fluid.loaded_modes(basis_for, 0.2, airflow_resistance=1e-3, **common)
    k = 4
    assert np.allclose(tight.frequencies_hz[:k], impervious.frequencies_hz[:k], rtol=1e-4)
    assert np.allclose(tight.loss_factor[:k], impervious.loss_factor[:k], rtol=1e-2)
    assert np.allclose(open_weave.frequencies_hz[:k], vacuum.frequencies_hz[:k], rtol=1e-4)
    assert np.allclose(open_weave.loss_factor[:k], eta, rtol=1e-3)
    for loaded in (tight, open_weave):
        assert np.all(loaded.frequencies_hz > 0.3 * impervious.frequencies_hz[0])
        assert np.all(loaded.loss_factor >= 0.0)
    # A moderate resistance: the flow through the weave dissipates on top of the structural
    # loss factor; the fundamental stays below the vacuum value and, being a damped root
    # (Re ω² = ω_n²(1 − 2ζ²) for viscous damping, Kinsler et al., Fundamentals of Acoustics,
    # 4th ed., §1.10), no more than a few per cent below the impervious one at η ≈ 0.3.
    middle = fluid.loaded_modes(basis_for, 0.2, airflow_resistance=1000.0, **common)
    assert 0.95 * impervious.frequencies_hz[0] < middle.frequencies_hz[0] < vacuum.frequencies_hz[0]
    assert np.all(middle.frequencies_hz > 0.9 * impervious.frequencies_hz[0])
    assert np.all(middle.loss_factor > eta)


def _whole_porous_operator(system, block, frequency: float):
    """The reference form of a porous panel's operator: stiffness, mass and damping of the
    panel and air coordinates z = (q, u), the air's matrices taken at ``frequency`` [Hz].

    ``(K_s − ω² M_s) q + iω rA (q − u) = 0`` and ``(K_cav − ω² M_air) u − iω rA (q − u) = 0``
    (the air on both sides moves with u, the sheet's flow resistance passes the relative
    velocity; U. Ingard, Notes on Acoustics, 2008), written out whole, 2n × 2n."""
    size = len(block)
    panel, air_part = slice(0, size), slice(size, 2 * size)
    k_cav, m_cav = system.cavity_matrices(frequency, block)
    stiffness = np.zeros((2 * size, 2 * size), dtype=complex)
    stiffness[panel, panel] = (system.stiffness[np.ix_(block, block)]
                               * (1 + 1j * system.eta_structure))
    stiffness[air_part, air_part] = k_cav
    mass = np.zeros((2 * size, 2 * size))
    mass[panel, panel] = system.structural_mass * np.eye(size)
    mass[air_part, air_part] = system.air_mass[np.ix_(block, block)] + m_cav
    eye = system.resistance * np.eye(size)
    damping = np.block([[eye, -eye], [-eye, eye]])
    return stiffness, mass, damping


def test_porous_operator_solved_through_its_schur_complement_matches_the_whole_solve():
    # porous._Block solves T(ω) z = b through the n × n Schur complement of the panel's
    # diagonal part; numpy.linalg.solve of the whole 2n × 2n operator (the standard library
    # route) must give the same z at complex ω, to rounding.
    from auditor.physics import porous
    from auditor.physics.coupled import assemble_system

    basis = _rectangle(400.0, 0.2, 1.2, 0.9)(400.0)
    system = assemble_system(basis, 0.2, 1, 0.08, 900.0, 1.21, 343.0, 0.05, SolveCache())
    block = system.family.blocks()[1]
    part = porous._Block(system, block)
    rng = np.random.default_rng(7)
    w = 2 * np.pi * np.array([35.0 + 2.0j, 120.0 + 9.0j, 310.0 + 1.0j])
    n = len(block)
    bq = rng.standard_normal((3, n)) + 1j * rng.standard_normal((3, n))
    bu = rng.standard_normal((3, n)) + 1j * rng.standard_normal((3, n))
    springs, masses = part.air_matrices(w.real / (2 * np.pi))
    yq, yu = part.solve(w, springs, masses, bq, bu)
    for k in range(3):
        stiffness, mass, damping = _whole_porous_operator(system, block, w[k].real / (2 * np.pi))
        whole = stiffness - w[k] ** 2 * mass + 1j * w[k] * damping
        z = np.linalg.solve(whole, np.concatenate([bq[k], bu[k]]))
        scale = np.max(np.abs(z))
        assert np.max(np.abs(np.concatenate([yq[k], yu[k]]) - z)) <= 1e-9 * scale


def test_porous_roots_match_the_quadratic_pencil_solved_whole():
    # porous._porous_roots solves a reduced first-order form (3n + J); scipy.linalg.eig of
    # the whole quadratic's companion pencil [[0, I], [−K, −C]] y = s [[I, 0], [0, M]] y
    # (a general-purpose reference library, 4n) must give the same nonzero roots and, for
    # each, the same vector z = (q, u) up to scale.
    from scipy import linalg

    from auditor.physics import porous
    from auditor.physics.coupled import assemble_system

    basis = _rectangle(400.0, 0.2, 1.2, 0.9)(300.0)
    system = assemble_system(basis, 0.2, 1, 0.08, 900.0, 1.21, 343.0, 0.05, SolveCache())
    for block in system.family.blocks():
        omega, z = porous._porous_roots(porous._Block(system, block), 0.0)
        stiffness, mass, damping = _whole_porous_operator(system, block, 0.0)
        size = len(stiffness)
        eye, zero = np.eye(size), np.zeros((size, size))
        s, y = linalg.eig(np.block([[zero, eye], [-stiffness, -damping]]),
                          np.block([[eye, zero], [zero, mass]]))
        reference, vectors = -1j * s, y[:size]
        keep = np.isfinite(reference) & (np.abs(reference) > 1e-6)
        reference, vectors = reference[keep], vectors[:, keep]
        mine = np.abs(omega) > 1e-6
        omega, z = omega[mine], z[:, mine]
        assert len(omega) == len(reference)
        for k in range(len(omega)):
            nearest = np.argmin(np.abs(reference - omega[k]))
            assert abs(reference[nearest] - omega[k]) <= 1e-9 * abs(omega[k])
            a, b = z[:, k], vectors[:, nearest]
            assert abs(np.vdot(a, b)) >= (1 - 1e-8) * np.linalg.norm(a) * np.linalg.norm(b)


def test_square_polygon_matches_the_rectangle_with_porous_sheet_and_sealed_cavity():
    # The same 1.2 m × 0.9 m panel by finite elements (40 modes, cavity modes by finite
    # elements) and by the analytic rectangle path (sine modes, cosine cavity modes; Morse &
    # Ingard, Theoretical Acoustics, 1968, §9.4) with a heavily damping weave (η ≈ 1):
    # fundamental within 2 %, its loss factor within 6 % (the finite-element basis is smaller).
    outline = [(0, 0), (1.2, 0), (1.2, 0.9), (0, 0.9)]
    common = dict(fmax=80, max_modes=6, room_side="air", plenum_side="sealed",
                  cavity_depth=0.05, material="fabric", airflow_resistance=300.0,
                  cache=SolveCache())
    polygon = fluid.loaded_modes(_polygon_basis(outline, 400.0, 0.2, 40), 0.2, **common)
    rectangle = fluid.loaded_modes(_rectangle(400.0, 0.2, 1.2, 0.9), 0.2, **common)
    assert polygon.frequencies_hz[0] == pytest.approx(rectangle.frequencies_hz[0], rel=0.02)
    assert polygon.loss_factor[0] == pytest.approx(rectangle.loss_factor[0], rel=0.06)
    assert polygon.labels[0] != "" and np.all(polygon.loss_factor > 0.0)


def test_a_panel_at_another_tension_reuses_its_solution_exactly():
    # K → sK with the mass (structure + incompressible air) unchanged keeps the eigenvectors
    # and scales the eigenvalues by s (a linear-algebra fact): the reused solution of the
    # remedy scan must give what a fresh solve gives, bit for bit.
    density = 0.25
    cache = SolveCache()
    first = fluid.loaded_modes(_rectangle(600, density, 1.5, 1.1), density, fmax=500,
                               max_modes=12, cache=cache)
    solves = cache.info()["eigenpairs"].misses
    again = fluid.loaded_modes(_rectangle(600 * 1.37, density, 1.5, 1.1), density, fmax=500,
                               max_modes=12, cache=cache)
    assert cache.info()["eigenpairs"].misses == solves   # the first solution was reused
    fresh = fluid.loaded_modes(_rectangle(600 * 1.37, density, 1.5, 1.1), density, fmax=500,
                               max_modes=12)
    assert len(first) and len(again) == len(fresh)
    assert np.array_equal(again.frequencies_hz, fresh.frequencies_hz)
    assert np.array_equal(again.loss_factor, fresh.loss_factor)
    # K → sK scales the incompressible frequencies by √s; the compressible correction, which
    # depends on frequency, moves them by a few per mille more
    assert np.allclose(again.frequencies_hz[:3] / first.frequencies_hz[:3], math.sqrt(1.37),
                       rtol=5e-3)


# --------------------------------------------------------------------------------------------
# Modes above the coupled basis; history independence of modes_for
# --------------------------------------------------------------------------------------------

def test_self_added_mass_tends_to_the_infinite_panel_value():
    from auditor.physics import uncoupled

    # A standing wave of wavenumber k ≫ k0 on a baffled panel carries an added mass of ρ0/k
    # per unit area a side (F. Fahy and P. Gardonio, Sound and Structural Vibration, 2nd ed.,
    # 2007, fluid loading of plates; from memory): the exact Rayleigh self terms of the
    # rectangle and the disc must tend to it, from above (edges add mass): at k√A of 70 and
    # more within 3 % on average, 5 % for nine modes in ten, 11 % for a mode with one
    # half-wave across the panel (the edges matter most to it).
    rectangle = membrane.rectangular_membrane_basis(1200.0, 1200.0, 0.25, 2.4, 1.6, 600.0)
    disc = membrane.circular_membrane_basis(1200.0, 0.25, 1.0, 600.0)
    for basis in (rectangle, disc):
        index = np.arange(len(basis))
        own, exact = uncoupled.self_added_mass(basis, index)
        k = uncoupled.mode_wavenumbers(basis, index)
        ratio = own * k / basis.region.area
        high = k * math.sqrt(basis.region.area) > 70
        assert exact and np.count_nonzero(high) > 100
        assert np.all(ratio[high] > 1.0) and np.all(ratio[high] < 1.11)
        assert np.mean(ratio[high]) == pytest.approx(1.0, abs=0.03)
        assert np.quantile(ratio[high], 0.9) < 1.05
    # and the rectangle's self terms are the diagonal of its full added-mass matrix (the
    # Rayleigh integral, Rayleigh, The Theory of Sound, vol. II, §278)
    small = membrane.rectangular_membrane_basis(1200.0, 1200.0, 0.25, 2.4, 1.6, 150.0)
    own, _ = uncoupled.self_added_mass(small, np.arange(len(small)))
    assert own == pytest.approx(np.diag(fluid.baffled_added_mass(small, 1.0)), rel=1e-9)


def test_rectangle_self_terms_against_adaptive_quadrature_at_any_order():
    from scipy import integrate

    # The self term of mode (m, n) of the unit-width rectangle of aspect α is
    # (4α²/2π) ∫₀¹∫₀¹ D_m(s) D_n(t)/√(s² + α²t²) ds dt, D_k(s) = sin(kπs)/(kπ) + (1 − s)cos(kπs)
    # (the one-dimensional correlations of the sine shapes). Checked against scipy's adaptive
    # quadrature of that integral after the Duffy substitution t ≤ s: s = σ, t = στ (and the
    # other half likewise), which leaves a smooth integrand (Duffy, SIAM J. Numer. Anal. 19,
    # 1982), including the high orders where a fixed-order two-dimensional rule loses digits.
    def correlation(k, s):
        return math.sin(k * math.pi * s) / (k * math.pi) + (1 - s) * math.cos(k * math.pi * s)

    def reference(alpha, m, n):
        def lower(tau, sigma):   # t = στ ≤ s = σ
            return correlation(m, sigma) * correlation(n, sigma * tau) / math.hypot(1, alpha * tau)

        def upper(sigma, tau):   # s = τσ ≤ t = τ
            return correlation(m, tau * sigma) * correlation(n, tau) / math.hypot(sigma, alpha)

        options = dict(epsabs=1e-13, epsrel=1e-10)
        a = integrate.dblquad(lower, 0, 1, 0, 1, **options)[0]
        b = integrate.dblquad(upper, 0, 1, 0, 1, **options)[0]
        return 4 * alpha**2 / (2 * math.pi) * (a + b)

    for alpha, m, n in ((2 / 3, 1, 1), (2 / 3, 3, 2), (1.5, 1, 5), (1.0, 12, 9)):
        table = added_mass.rectangle_self_table(alpha, 16, 16)
        assert table[m - 1, n - 1] == pytest.approx(reference(alpha, m, n), rel=1e-7)
    # High orders, where the integrand has hundreds of half-periods: against the same Duffy
    # form summed by a tensor Gauss–Legendre rule of 900 × 900 points (numpy's leggauss).
    x, w = np.polynomial.legendre.leggauss(900)
    x, w = 0.5 * (x + 1), 0.5 * w
    sigma, tau = np.meshgrid(x, x, indexing="ij")
    weight = np.outer(w, w)

    def correlations(k, s):
        return np.sin(k * np.pi * s) / (k * np.pi) + (1 - s) * np.cos(k * np.pi * s)

    m, n = 170, 150
    both = (np.sum(weight * correlations(m, sigma) * correlations(n, sigma * tau)
                   / np.hypot(1, tau))
            + np.sum(weight * correlations(m, tau * sigma) * correlations(n, tau)
                     / np.hypot(sigma, 1)))
    table = added_mass.rectangle_self_table(1.0, 192, 192)
    assert table[m - 1, n - 1] == pytest.approx(4 / (2 * math.pi) * both, rel=1e-8)


def test_point_quadrature_spectra_agree_with_the_closed_form_sine_transforms():
    # The compressible terms use each mode's spectrum on a polar wavenumber grid. On a
    # rectangle the transform of sin(mπx/L) on [0, L] is in closed form (a standard Fourier
    # pair); the point quadrature used for any outline, with its phases stepped along κ,
    # must give the same angular densities g(κ) to the accuracy of its quadrature.
    basis = membrane.rectangular_membrane_basis(500, 500, 0.25, 1.2, 0.8, 60)
    cache = SolveCache()
    analytic = quadrature.quadrature_family(basis, cache)
    points = quadrature.point_shapes(basis, cells_target=6000)
    kappa = radiation.kappa_grid(analytic, 2 * np.pi * 1.5 * 60 / 343.0)
    coefficients = np.eye(len(basis))[:, :6]
    exact = radiation.SpectralGrid(analytic, kappa).density(coefficients)
    stepped = radiation.SpectralGrid(points, kappa, cache=cache).density(coefficients)
    assert np.max(np.abs(stepped - exact)) < 2e-3 * np.max(np.abs(exact))


def test_modes_above_the_coupled_basis_agree_with_the_full_coupling():
    from auditor.physics import uncoupled

    # A 2.4 m × 1.6 m film (0.25 kg/m², 1200 N/m, air both sides) to 250 Hz: the lowest 50
    # in-vacuo modes coupled through the air and every mode above them loaded by its own air
    # mass, against the full Rayleigh-integral coupling (Rayleigh, The Theory of Sound, vol.
    # II, §278) in 600 basis modes: the same number of modes below every frequency, the
    # frequencies within 1 % (well inside a ±10 % separation margin, common practice).
    tension, rho, width, length, fmax = 1200.0, 0.25, 2.4, 1.6, 250.0

    def basis_for(f_limit, max_modes=None):
        return membrane.rectangular_membrane_basis(tension, tension, rho, width, length,
                                                   f_limit, max_modes=max_modes)

    reference = fluid.loaded_modes(basis_for, rho, fmax=fmax, max_modes=None,
                                   basis_extent=1.6, max_basis=600)
    cache = SolveCache()
    coupled = fluid.loaded_modes(basis_for, rho, fmax=fmax, max_modes=None, max_basis=50,
                                 cache=cache)
    assert coupled.complete_to_hz < 0.5 * fmax      # 50 modes do not reach 250 Hz in air
    extended = basis_for(1.5 * fmax)
    above = uncoupled.uncoupled_loaded_modes(
        extended, len(coupled.basis), rho, fmax=fmax, room_side="air", plenum_side="air",
        cavity_depth=None, airflow_resistance=None, structural_loss_factor=0.03, cache=cache)
    assert above.complete_to_hz == fmax
    combined = np.sort(np.concatenate([coupled.frequencies_hz, above.frequencies_hz]))
    assert len(combined) == len(reference) > 150
    for f in (60.0, 100.0, 150.0, 200.0, 240.0):
        assert np.count_nonzero(combined <= f) == np.count_nonzero(reference.frequencies_hz <= f)
    assert combined == pytest.approx(reference.frequencies_hz, rel=0.01)
    assert np.all(above.loss_factor == pytest.approx(0.03))


def _film(**fields):
    from auditor.model import Panel, SourceRef

    defaults = dict(panel="P1", source=SourceRef("test.csv", "", 2), shape="rectangle",
                    width=2.4, length=1.6, areal_density=0.25, tension_x=1000.0,
                    tension_y=1000.0)
    return Panel(**{**defaults, **fields})


def test_auditing_order_does_not_change_any_frequency():
    from auditor.physics.modes import modes_for

    # DESIGN.md: the same input gives the same output whatever ran before. A rectangle with
    # air on both sides (and the same at another tension, as a remedy scan solves it), a
    # polygon, a circle over a sealed cavity: solved in two orders, each order sharing one
    # cache, and each alone; every frequency bit for bit the same.
    panels = [
        _film(),
        _film(tension_x=1370.0, tension_y=1370.0),
        _film(shape="polygon", width=None, length=None, room_side="none", plenum_side="none",
              outline=((0.0, 0.0), (2.0, 0.0), (2.0, 1.0), (1.0, 1.0), (1.0, 2.0), (0.0, 2.0))),
        _film(shape="circle", width=None, length=None, diameter=1.2, plenum_side="sealed",
              cavity_depth=0.1),
    ]

    def solve(order, cache):
        return {i: np.array([m.frequency_hz for m in modes_for(panels[i], 90.0,
                                                               cache=cache).modes])
                for i in order}

    forward = solve(range(len(panels)), SolveCache())
    backward = solve(reversed(range(len(panels))), SolveCache())
    alone = {i: solve([i], None)[i] for i in range(len(panels))}
    for i in range(len(panels)):
        assert len(forward[i]) > 3
        assert np.array_equal(forward[i], backward[i])
        assert np.array_equal(forward[i], alone[i])


def test_a_large_film_in_air_lists_every_mode_to_the_limit():
    from auditor.physics.modes import modes_for

    # A 4.8 m × 3.2 m film (0.25 kg/m², 1200 N/m) in air to 300 Hz: far more modes than the
    # coupled basis holds; every one is listed (in air each lies below its in-vacuo value, so
    # there are at least as many as in vacuo: Kinsler et al., 4th ed., §4.4 counts those) and
    # the list says it is complete to the limit.
    film = _film(width=4.8, length=3.2, tension_x=1200.0, tension_y=1200.0)
    result = modes_for(film, 300.0)
    vacuum = membrane.rectangular_membrane_frequencies(1200.0, 1200.0, 0.25, 4.8, 3.2, 300.0)[0]
    assert result.complete_to_hz == 300.0
    assert len(result.modes) > len(vacuum) > 800
    assert all(m.frequency_hz < m.in_vacuo_hz for m in result.modes)
    frequencies = [m.frequency_hz for m in result.modes]
    assert frequencies == sorted(frequencies) and frequencies[-1] <= 300.0
    # each mode has its shape: the coupled ones and those above the coupled basis
    grid = result.shape_grid(len(result.modes) - 1)
    assert np.nanmax(np.abs(grid.values)) == pytest.approx(1.0)
