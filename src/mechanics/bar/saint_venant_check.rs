//! Outside check of the square and hexagon section constants in `mechanics/bar/sections.rs`:
//! a small finite-difference solve of Saint-Venant torsion with Prandtl's stress function,
//! written here independently of the code under test (tests only; imports nothing from the
//! pipeline).
//!
//! Prandtl's formulation (Timoshenko & Goodier, *Theory of Elasticity*, 3rd ed., ch. 10):
//! ∇²φ = −2Gθ inside the section, φ = 0 on its boundary; the torque is T = 2∫φ dA, so the
//! torsion constant is J = T/(Gθ); the shear stress is the slope of φ, largest where the
//! boundary is nearest the centre (the middle of a side or flat), τ_max = |∂φ/∂n|. With
//! Gθ = 1, J = 2∫φ dA and τ_max/T = |∂φ/∂n|/J.
//!
//! The square is solved on a square grid, the regular hexagon on a triangular lattice whose
//! nodes fall exactly on its six sides (so neither boundary is a staircase). Both stencils are
//! second order, so two grids (h and h/2) are combined by Richardson extrapolation.
//!
//! A second outside source for the square: Timoshenko & Goodier's series for a rectangular bar
//! (ch. 10), J = (1/3)·s⁴·(1 − (192/π⁵)·Σ_{n odd} tanh(nπ/2)/n⁵) for a square of side s, and
//! their table for rectangular bars, k₁ = 0.1406 and k₂ = 0.208 at a side ratio of 1
//! (J = k₁·s⁴, τ_max = T/(k₂·s³); table values from memory). For the hexagon, the handbook
//! value ≈ 0.115·s⁴ across flats is from memory; the solve here is the check.
//!
//! Part of the mechanics stage: it must never import report, `analyze`, `batch`, `find_marks`,
//! `calibrate` or the CLI.

use super::SectionSpec;
use super::sections::{HEX_J_COEFF, HEX_TAU_COEFF, SQUARE_J_COEFF, SQUARE_TAU_COEFF};

/// Successive over-relaxation on `n` unknowns with neighbour lists, for the discrete Poisson
/// problem  Σ_j w·(φ_j − φ_i) = −2  at every interior node i (boundary neighbours are 0 and
/// left out of `nbrs`). `degree` is the full neighbour count (4 square, 6 triangular).
fn sor(nbrs: &[Vec<usize>], degree: f64, w: f64, omega: f64) -> Vec<f64> {
    let n = nbrs.len();
    let mut phi = vec![0.0; n];
    for _ in 0..20_000 {
        let mut change: f64 = 0.0;
        for i in 0..n {
            let sum: f64 = nbrs[i].iter().map(|&j| phi[j]).sum();
            let target = (sum + 2.0 / w) / degree;
            let next = phi[i] + omega * (target - phi[i]);
            change = change.max((next - phi[i]).abs());
            phi[i] = next;
        }
        if change < 1e-14 {
            return phi;
        }
    }
    panic!("SOR did not converge");
}

/// (J/s⁴, τ_max·s³/T) for a square of side s = 1 on an m × m grid (m even).
fn square_on_grid(m: usize) -> (f64, f64) {
    let h = 1.0 / m as f64;
    // Interior nodes (i, k), 1 ≤ i, k ≤ m − 1.
    let id = |i: usize, k: usize| (i - 1) * (m - 1) + (k - 1);
    let inside = |i: usize, k: usize| i >= 1 && k >= 1 && i < m && k < m;
    let mut nbrs = vec![Vec::new(); (m - 1) * (m - 1)];
    for i in 1..m {
        for k in 1..m {
            for (di, dk) in [(1i64, 0i64), (-1, 0), (0, 1), (0, -1)] {
                let (a, b) = ((i as i64 + di) as usize, (k as i64 + dk) as usize);
                if inside(a, b) {
                    nbrs[id(i, k)].push(id(a, b));
                }
            }
        }
    }
    let omega = 2.0 / (1.0 + (std::f64::consts::PI * h).sin());
    let phi = sor(&nbrs, 4.0, 1.0 / (h * h), omega);
    let j = 2.0 * phi.iter().sum::<f64>() * h * h;
    // Mid-side (x = 1/2, y = 0): one-sided second-order slope along the inward normal.
    let (p1, p2) = (phi[id(m / 2, 1)], phi[id(m / 2, 2)]);
    let slope = (4.0 * p1 - p2) / (2.0 * h);
    (j, slope / j)
}

/// Solves on the triangular lattice of spacing h = 1/m, nodes h·(q + r/2, r·√3/2), over the
/// nodes where `inside(q, r)`; the others are the boundary (φ = 0). Returns (J, slope), the
/// slope along +y at the boundary node (c, r0) on the side r = r0, from the nodes straight
/// above it (same x) on rows r0 + 2 and r0 + 4, which are h·√3 and 2h·√3 away.
fn on_lattice(m: usize, inside: impl Fn(i64, i64) -> bool, c: i64, r0: i64) -> (f64, f64) {
    let mi = m as i64;
    let h = 1.0 / m as f64;
    let mut index = std::collections::HashMap::new();
    let mut nodes = Vec::new();
    for q in -2 * mi..=2 * mi {
        for r in -2 * mi..=2 * mi {
            if inside(q, r) {
                index.insert((q, r), nodes.len());
                nodes.push((q, r));
            }
        }
    }
    let steps = [(1, 0), (-1, 0), (0, 1), (0, -1), (1, -1), (-1, 1)];
    let nbrs: Vec<Vec<usize>> = nodes
        .iter()
        .map(|&(q, r)| {
            steps
                .iter()
                .filter_map(|&(dq, dr)| index.get(&(q + dq, r + dr)).copied())
                .collect()
        })
        .collect();
    // Six-point Laplacian: (2/(3h²))·Σ(φ_j − φ_i).
    let omega = 2.0 / (1.0 + (std::f64::consts::PI * h).sin());
    let phi = sor(&nbrs, 6.0, 2.0 / (3.0 * h * h), omega);
    let cell_area = 3f64.sqrt() / 2.0 * h * h;
    let j = 2.0 * phi.iter().sum::<f64>() * cell_area;
    let at = |dr: i64| phi[index[&(c - dr / 2, r0 + dr)]];
    let d = h * 3f64.sqrt();
    let slope = (4.0 * at(2) - at(4)) / (2.0 * d);
    (j, slope)
}

/// (J/s⁴, τ_max·s³/T) for a regular hexagon of side 1 (across flats s = √3) on a lattice of
/// spacing 1/m (m even): inside when max(|q|, |r|, |q + r|) < m; the six sides are the nodes
/// where that maximum equals m, so they lie exactly on the hexagon.
fn hexagon_on_lattice(m: usize) -> (f64, f64) {
    let mi = m as i64;
    let inside = |q: i64, r: i64| q.abs().max(r.abs()).max((q + r).abs()) < mi;
    // Mid-flat of the side r = −m (y = −s/2) is the point x = 0, i.e. q = m/2 on that row.
    let (j, slope) = on_lattice(m, inside, mi / 2, -mi);
    let s = 3f64.sqrt();
    // Per unit across flats: J scales with s⁴, τ·s³/T is scale-free.
    (j / s.powi(4), slope / j * s.powi(3))
}

/// (J/a⁴, τ_max·a³/T) for an equilateral triangle of side a = 1 (vertices at lattice nodes
/// (0, 0), (m, 0), (0, m); inside when q > 0, r > 0, q + r < m).
fn triangle_on_lattice(m: usize) -> (f64, f64) {
    let mi = m as i64;
    let inside = |q: i64, r: i64| q > 0 && r > 0 && q + r < mi;
    // Mid-side of the side r = 0 is x = 1/2, i.e. q = m/2 on that row.
    let (j, slope) = on_lattice(m, inside, mi / 2, 0);
    (j, slope / j)
}

/// Richardson extrapolation of a second-order result from grids h and h/2.
fn richardson(coarse: f64, fine: f64) -> f64 {
    (4.0 * fine - coarse) / 3.0
}

fn square_solve() -> (f64, f64) {
    let (a, b) = (square_on_grid(40), square_on_grid(80));
    (richardson(a.0, b.0), richardson(a.1, b.1))
}

fn hexagon_solve() -> (f64, f64) {
    let (a, b) = (hexagon_on_lattice(24), hexagon_on_lattice(48));
    (richardson(a.0, b.0), richardson(a.1, b.1))
}

/// Timoshenko & Goodier's series for the torsion constant of a square, per s⁴.
fn square_series() -> f64 {
    let pi = std::f64::consts::PI;
    let sum: f64 = (0..50)
        .map(|k| f64::from(2 * k + 1))
        .map(|n| (n * pi / 2.0).tanh() / n.powi(5))
        .sum();
    (1.0 - 192.0 / pi.powi(5) * sum) / 3.0
}

/// Relative difference.
fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs()
}

#[test]
fn square_torsion_constant_matches_the_prandtl_solve_and_the_series() {
    let (j_fd, _) = square_solve();
    let series = square_series();
    // The solve itself agrees with the series, and both with the table's 0.1406.
    assert!(rel(j_fd, series) < 2e-4, "solve {j_fd} vs series {series}");
    assert!(rel(series, 0.1406) < 5e-4, "series {series}");
    // The code's constant, and what a section reports, against the solve.
    assert!(
        rel(SQUARE_J_COEFF, j_fd) < 5e-4,
        "{SQUARE_J_COEFF} vs {j_fd}"
    );
    let s_m: f64 = 0.0127;
    let j = SectionSpec::square(25.0, 12.7).torsion_constant_m4();
    assert!(rel(j / s_m.powi(4), j_fd) < 5e-4, "{j}");
}

#[test]
fn square_peak_stress_matches_the_prandtl_solve_and_the_table() {
    let (_, tau_fd) = square_solve();
    // Table k₂ = 0.208 (3 figures, so 0.25 % of rounding).
    assert!(rel(tau_fd, 1.0 / 0.208) < 2.5e-3, "solve {tau_fd}");
    assert!(
        rel(SQUARE_TAU_COEFF, tau_fd) < 1e-3,
        "{SQUARE_TAU_COEFF} vs {tau_fd}"
    );
    let tau = SectionSpec::square(25.0, 12.7).shear_stress_per_nm();
    assert!(rel(tau * 0.0127f64.powi(3), tau_fd) < 1e-3, "{tau}");
}

#[test]
fn hexagon_torsion_constant_matches_the_prandtl_solve() {
    let (j_fd, _) = hexagon_solve();
    // The handbook's ≈ 0.115 (from memory, 3 figures).
    assert!(rel(j_fd, 0.115) < 1e-3, "solve {j_fd}");
    assert!(rel(HEX_J_COEFF, j_fd) < 5e-4, "{HEX_J_COEFF} vs {j_fd}");
    let j = SectionSpec::hex(30.0, 19.0).torsion_constant_m4();
    assert!(rel(j / 0.019f64.powi(4), j_fd) < 5e-4, "{j}");
}

#[test]
fn hexagon_peak_stress_matches_the_prandtl_solve() {
    let (_, tau_fd) = hexagon_solve();
    assert!(
        rel(HEX_TAU_COEFF, tau_fd) < 1e-3,
        "{HEX_TAU_COEFF} vs {tau_fd}"
    );
    let tau = SectionSpec::hex(30.0, 19.0).shear_stress_per_nm();
    assert!(rel(tau * 0.019f64.powi(3), tau_fd) < 1e-3, "{tau}");
}

#[test]
fn the_lattice_solver_reproduces_the_equilateral_triangle() {
    // The equilateral triangle has an exact solution (Timoshenko & Goodier, ch. 10):
    // J = √3·a⁴/80 and τ_max = 20·T/a³ at the middle of each side (side a). The same lattice
    // and slope formula as the hexagon must reproduce both, so the hexagon result is trusted.
    let (a, b) = (triangle_on_lattice(48), triangle_on_lattice(96));
    let (j, tau) = (richardson(a.0, b.0), richardson(a.1, b.1));
    assert!(rel(j, 3f64.sqrt() / 80.0) < 2e-4, "J {j}");
    assert!(rel(tau, 20.0) < 1e-3, "tau {tau}");
}

#[test]
fn the_square_grid_converges_at_second_order() {
    // Halving h cuts the error against the series about four times, which is what makes the
    // Richardson extrapolation above valid.
    let series = square_series();
    let ratio = (square_on_grid(40).0 - series) / (square_on_grid(80).0 - series);
    assert!((3.5..4.5).contains(&ratio), "convergence ratio {ratio}");
}
