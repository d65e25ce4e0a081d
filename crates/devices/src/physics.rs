//! Carrier statistics of two-dimensional bands, exact in Fermi-Dirac statistics.
//!
//! * Parabolic 2D band (a TMD monolayer's conduction or valence band): constant density of
//!   states `D = g m* / (2π ħ²)` per area, so the sheet density is exactly
//!   `n = D kT F0(η)` with `F0(η) = ln(1 + e^η)` and `η = (E_F - E_edge) / kT`
//!   (M. Lundstrom and J. Guo, *Nanoscale Transistors*, Springer 2006, ch. 2).
//! * Dirac band with an optional gap (graphene, gapped graphene as a gate electrode):
//!   `E = ±sqrt(Δ² + (ħ v k)²)`, density of states `g |E| / (2π (ħ v)²)` outside the gap, so
//!   `n(μ) = g / (2π (ħ v)²) [Δ kT F0(η) + (kT)² F1(η)]` with `η = (μ - Δ) / kT` and
//!   `F1(η) = -Li2(-e^η)`; for Δ = 0 this is the graphene result of T. Fang, A. Konar, H. Xing and
//!   D. Jena, Appl. Phys. Lett. 91, 092109 (2007). Holes follow from `p(μ) = n(-μ)`.
//!
//! Energies are in joules, densities per square metre. All functions are smooth and overflow
//! free for any finite argument.

/// Elementary charge (C), exact in the 2019 SI.
pub const Q: f64 = 1.602_176_634e-19;
/// Boltzmann constant (J/K), exact in the 2019 SI.
pub const K_B: f64 = 1.380_649e-23;
/// Reduced Planck constant (J s), from the exact Planck constant of the 2019 SI.
pub const HBAR: f64 = 6.626_070_15e-34 / (2.0 * std::f64::consts::PI);
/// Electron rest mass (kg), CODATA 2018.
pub const M0: f64 = 9.109_383_701_5e-31;
/// Vacuum permittivity (F/m), CODATA 2018.
pub const EPS0: f64 = 8.854_187_812_8e-12;

/// `F0(η) = ln(1 + e^η)`, the complete Fermi-Dirac integral of order 0.
pub fn f0(eta: f64) -> f64 {
    if eta > 0.0 {
        eta + (-eta).exp().ln_1p()
    } else {
        eta.exp().ln_1p()
    }
}

/// `dF0/dη = 1 / (1 + e^-η)`, the logistic function.
pub fn logistic(eta: f64) -> f64 {
    if eta >= 0.0 {
        1.0 / (1.0 + (-eta).exp())
    } else {
        let e = eta.exp();
        e / (1.0 + e)
    }
}

/// The dilogarithm `Li2(x)` for `-1 <= x <= 0`.
fn li2_negative_unit(x: f64) -> f64 {
    debug_assert!((-1.0..=0.0).contains(&x));
    // The power series Σ x^k / k² converges at least as 2^-k for |x| <= 1/2. Beyond, the
    // Landen identity Li2(x) = -Li2(x / (x - 1)) - ln²(1 - x) / 2 maps x onto y = x/(x - 1) in
    // [1/3, 1/2] (L. Lewin, Polylogarithms and Associated Functions, 1981, ch. 1).
    fn series(y: f64) -> f64 {
        let mut term = y;
        let mut sum = 0.0f64;
        let mut k = 1.0f64;
        while k < 200.0 {
            let add = term / (k * k);
            sum += add;
            if add.abs() <= 1e-17 * sum.abs() {
                break;
            }
            k += 1.0;
            term *= y;
        }
        sum
    }
    if x >= -0.5 {
        series(x)
    } else {
        let l = (-x).ln_1p();
        -series(x / (x - 1.0)) - 0.5 * l * l
    }
}

/// `F1(η) = ∫0^∞ x / (1 + e^(x - η)) dx = -Li2(-e^η)`, the complete Fermi-Dirac integral of
/// order 1 (without the Γ normalisation). `dF1/dη = F0(η)`.
pub fn f1(eta: f64) -> f64 {
    if eta <= 0.0 {
        -li2_negative_unit(-eta.exp())
    } else {
        // Inversion: -Li2(-e^η) = π²/6 + η²/2 + Li2(-e^-η).
        std::f64::consts::PI.powi(2) / 6.0 + 0.5 * eta * eta + li2_negative_unit(-(-eta).exp())
    }
}

/// Density of states per area of a parabolic band with effective mass `mass` (in units of the
/// electron mass) and spin-valley degeneracy `g`, in 1/(J m²).
pub fn parabolic_dos(mass: f64, g: f64) -> f64 {
    g * mass * M0 / (2.0 * std::f64::consts::PI * HBAR * HBAR)
}

/// Sheet density of a parabolic band: `D kT F0((E_F - E_edge)/kT)` and its derivative with
/// respect to `E_F - E_edge` (per joule).
pub fn parabolic_density(dos: f64, kt: f64, excess: f64) -> (f64, f64) {
    let eta = excess / kt;
    (dos * kt * f0(eta), dos * logistic(eta))
}

/// Prefactor `g / (2π (ħ v)²)` of a Dirac band, in 1/(J² m²).
pub fn dirac_prefactor(velocity: f64, g: f64) -> f64 {
    g / (2.0 * std::f64::consts::PI * (HBAR * velocity).powi(2))
}

/// Electron density of one (gapped) Dirac band at chemical potential `mu` measured from the
/// band centre, with half gap `delta` (J): value and derivative with respect to `mu`.
pub fn dirac_band_density(prefactor: f64, kt: f64, delta: f64, mu: f64) -> (f64, f64) {
    let eta = (mu - delta) / kt;
    let n = prefactor * (delta * kt * f0(eta) + kt * kt * f1(eta));
    let dn = prefactor * (delta * logistic(eta) + kt * f0(eta));
    (n, dn)
}

/// `ln n` and `d ln n / dμ` (per joule) of one (gapped) Dirac band, the same density as
/// [`dirac_band_density`] but free of underflow: for a level deep in the gap or below the band
/// (`η = (μ - Δ)/kT` down to about -1e300), where `n` itself is below the smallest `f64`.
///
/// For `η <= 0` it writes `F0(η) = x g0(x)` and `F1(η) = x g1(x)` with `x = e^η`,
/// `g0 = ln(1 + x)/x` and `g1 = -Li2(-x)/x` (both 1 at `x = 0`), so that
/// `ln n = ln(g/(2π(ħv)²) kT) + η + ln(Δ g0 + kT g1)`.
pub fn dirac_band_log_density(prefactor: f64, kt: f64, delta: f64, mu: f64) -> (f64, f64) {
    let eta = (mu - delta) / kt;
    if eta > 0.0 {
        let (n, dn) = dirac_band_density(prefactor, kt, delta, mu);
        return (n.ln(), dn / n);
    }
    let x = eta.exp();
    // Below 1e-8 the next terms of the series (x²/3 and x²/9) are under the rounding unit.
    let (g0, g1) = if x < 1e-8 {
        (1.0 - 0.5 * x, 1.0 - 0.25 * x)
    } else {
        (x.ln_1p() / x, f1(eta) / x)
    };
    let w = delta * g0 + kt * g1;
    // dn/dμ = g/(2π(ħv)²) x [Δ/(1 + x) + kT g0].
    (
        (prefactor * kt).ln() + eta + w.ln(),
        (delta / (1.0 + x) + kt * g0) / (kt * w),
    )
}

/// Net electron density `n - p` of a gapped Dirac sheet and its derivative `d(n - p)/dμ`;
/// `q² d(n - p)/dμ` is its quantum capacitance.
pub fn dirac_net_density(prefactor: f64, kt: f64, delta: f64, mu: f64) -> (f64, f64) {
    let (n, dn) = dirac_band_density(prefactor, kt, delta, mu);
    let (p, dp) = dirac_band_density(prefactor, kt, delta, -mu);
    (n - p, dn + dp)
}

#[cfg(test)]
mod tests {
    use super::*;
    use quadrature::double_exponential::integrate;

    /// F1 against direct quadrature of x / (1 + e^(x - η)) (an independent double-exponential
    /// rule from the `quadrature` crate), across the series switch at η = 0.
    #[test]
    fn f1_matches_quadrature() {
        for eta in [-30.0f64, -5.0, -1.0, -1e-3, 0.0, 1e-3, 0.7, 3.0, 12.0, 40.0] {
            let upper = eta.max(0.0) + 60.0;
            // Split at the Fermi edge so the rule never integrates across the step.
            let g = |x: f64| x / (1.0 + (x - eta).exp());
            let edge = eta.max(0.0);
            let tol = 1e-16 * f1(eta);
            let q = integrate(g, 0.0, edge.max(1e-300), tol).integral * f64::from(edge > 0.0)
                + integrate(g, edge, upper, tol).integral;
            let f = f1(eta);
            assert!((f / q - 1.0).abs() <= 1e-10, "η = {eta}: {f} vs {q}");
        }
        // F1(0) = π²/12 (Li2(-1) = -π²/12).
        assert!((f1(0.0) - std::f64::consts::PI.powi(2) / 12.0).abs() < 1e-15);
    }

    /// Parabolic 2D density against the closed form n = D kT ln(1 + e^η) evaluated
    /// independently, and its degenerate and Boltzmann limits (Lundstrom & Guo 2006).
    #[test]
    fn parabolic_sheet_density() {
        let dos = parabolic_dos(0.5, 4.0);
        let kt = K_B * 300.0;
        // D = g m* m0 / (2π ħ²) for m* = 0.5, g = 4: 2.607275e37 /(J m²) (recomputed from the
        // CODATA constants; Lundstrom & Guo 2006 give the formula).
        assert!((dos / 2.607_275e37 - 1.0).abs() < 1e-6);
        let (n, dn) = parabolic_density(dos, kt, 0.0);
        assert!((n - dos * kt * 2f64.ln()).abs() < 1e-9 * n);
        assert!((dn - 0.5 * dos).abs() < 1e-12 * dos);
        let (n, _) = parabolic_density(dos, kt, 0.1 * Q);
        assert!((n / (dos * kt * (1.0 + (0.1 * Q / kt).exp()).ln()) - 1.0).abs() < 1e-14);
        let (n, _) = parabolic_density(dos, kt, -0.5 * Q);
        assert!((n / (dos * kt * (-0.5 * Q / kt).exp()) - 1.0).abs() < 1e-8);
    }

    /// Graphene quantum capacitance against the closed form
    /// C_Q = (2 q² kT / (π (ħ v)²)) ln[2 (1 + cosh(qV/kT))] (Fang, Konar, Xing, Jena 2007).
    #[test]
    fn graphene_quantum_capacitance() {
        let kt = K_B * 300.0;
        let pre = dirac_prefactor(1e6, 4.0);
        for v in [0.0, 0.1, 0.2, 0.3, -0.25] {
            let (_, d) = dirac_net_density(pre, kt, 0.0, v * Q);
            let cq = Q * Q * d;
            let closed = 2.0 * Q * Q * kt / (std::f64::consts::PI * (HBAR * 1e6).powi(2))
                * (2.0 * (1.0 + (Q * v / kt).cosh())).ln();
            assert!(
                (cq / closed - 1.0).abs() < 1e-12,
                "V = {v}: {cq} vs {closed}"
            );
        }
    }

    /// Gapped Dirac density against direct quadrature of the density of states times the
    /// Fermi function (independent double-exponential rule).
    #[test]
    fn gapped_dirac_density_matches_quadrature() {
        let kt = K_B * 300.0;
        let pre = dirac_prefactor(1e6, 4.0);
        let delta = 0.015 * Q;
        for mu_ev in [-0.05, 0.0, 0.015, 0.05, 0.1, 0.3] {
            let mu = mu_ev * Q;
            let (n, _) = dirac_band_density(pre, kt, delta, mu);
            // Integrate in eV to keep the rule's tolerances meaningful.
            let upper = mu_ev.max(0.015) + 2.0;
            let edge = mu_ev.max(0.015);
            let g = |e: f64| {
                let ej = e * Q;
                pre * ej / (1.0 + ((ej - mu) / kt).exp()) * Q
            };
            let q = integrate(g, 0.015, edge, 1e-9 * n).integral * f64::from(edge > 0.015)
                + integrate(g, edge, upper, 1e-9 * n).integral;
            assert!((n / q - 1.0).abs() < 1e-8, "μ = {mu_ev} eV: {n} vs {q}");
        }
    }
}
