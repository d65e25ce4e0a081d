//! Electrostatics of short 2D channels in the quasi-two-dimensional (scale-length) picture.
//!
//! Between source and drain, the channel potential `ψ(y)` of a thin body under a gate obeys
//! `λ² ψ'' = ψ - ψ_L` (K. K. Young, "Short-channel effect in fully depleted SOI MOSFETs", IEEE
//! Trans. Electron Devices 36, 399 (1989); R.-H. Yan, A. Ourmazd and K. F. Lee, "Scaling the
//! Si MOSFET: from bulk to SOI to bulk", IEEE Trans. Electron Devices 39, 1704 (1992); recalled
//! from memory), where `ψ_L` is the long-channel potential the gate sets and `λ` the natural
//! length of the stack: for a single gate over a thin body, `λ = sqrt(ε_ch t_ch t_ins / ε_ins)`,
//! and for a layered insulator `t_ins / ε_ins` is the sum over its layers (the layers in
//! series, as for the insulator capacitance).
//!
//! With the contacts holding the ends at `ψ_L + a` (source) and `ψ_L + b` (drain, `b = a +
//! V_DS` for electrons), the solution is
//! `ψ(y) - ψ_L = [b sinh(y/λ) + a sinh((L - y)/λ)] / sinh(L/λ)`,
//! and where both ends lie on the same side of `ψ_L` its extremum (the top of the barrier
//! carriers must cross) is, with `s = L/λ`,
//!
//! `δ = ψ_ext - ψ_L = sign(a) sqrt((b - a e^{-s}) (a e^{s} - b)) / sinh(s)`
//!
//! (write the solution as `P e^{y/λ} + R e^{-y/λ}`; its extremum is `2 sqrt(P R)`). For long
//! channels `δ → 2 sqrt(a b) e^{-L/(2λ)}`: the barrier lowering falls off as `e^{-L/2λ}` and
//! grows with the drain bias, which is drain-induced barrier lowering; its derivative with
//! respect to `ψ_L` is the loss of gate control behind the swing's degradation. Where the
//! drain end crosses to the other side, the extremum moves onto the source contact and `δ`
//! follows `a` continuously ([`barrier_shift`] handles every case).

/// The natural length `λ = sqrt(ε_ch t_ch Σ t_i / ε_i)` (m) of a channel of relative
/// permittivity `channel_permittivity` and thickness `channel_thickness` (m) under insulator
/// layers given as (thickness m, relative permittivity).
pub fn natural_length(
    channel_permittivity: f64,
    channel_thickness: f64,
    layers: impl IntoIterator<Item = (f64, f64)>,
) -> f64 {
    let series: f64 = layers.into_iter().map(|(t, eps)| t / eps).sum();
    (channel_permittivity * channel_thickness * series).sqrt()
}

/// The shift `δ` of the channel's barrier top from the long-channel potential (V) and its
/// derivatives with respect to `a` and `b`, for a channel `s = L/λ` natural lengths long whose
/// source end sits `a` and drain end `b` above the long-channel potential (volts; negative
/// below). `δ` is the extremum of the quasi-2D potential between the ends when both ends lie
/// on one side and the extremum is inside the channel, and otherwise the end value nearer the
/// long-channel potential (the barrier then sits at a contact). Smooth in `a`, `b` and `s`
/// where the extremum is inside; continuous everywhere.
pub fn barrier_shift(a: f64, b: f64, s: f64) -> (f64, f64, f64) {
    // Work with both ends on the positive side; mirror the negative case.
    if a < 0.0 && b < 0.0 {
        let (d, da, db) = barrier_shift(-a, -b, s);
        return (-d, da, db);
    }
    if a <= 0.0 || b <= 0.0 {
        // The ends straddle the long-channel potential: the profile is monotonic and the
        // smaller end (in magnitude toward ψ_L) is the barrier; with one end at ψ_L, δ = 0.
        return if a.abs() <= b.abs() {
            (a, 1.0, 0.0)
        } else {
            (b, 0.0, 1.0)
        };
    }
    // The extremum `P e^t + R e^-t` sits at `t = ln(R/P) / 2`, inside `(0, s)` exactly when
    // `b < a cosh s` and `a < b cosh s`; otherwise it is at the nearer end.
    let ch = s.cosh();
    if b >= a * ch {
        return (a, 1.0, 0.0);
    }
    if a >= b * ch {
        return (b, 0.0, 1.0);
    }
    // δ is homogeneous of degree one in (a, b) and its slopes of degree zero: work with the
    // ends scaled to the larger one, so that ends far below a volt (a deep-off branch at
    // cryogenic temperatures, 1e-130 V) neither underflow `p r` nor divide by a zero root.
    let scale = a.max(b);
    let (a, b) = (a / scale, b / scale);
    let (e_minus, e_plus) = ((-s).exp(), s.exp());
    let p = b - a * e_minus;
    let r = a * e_plus - b;
    let sh = s.sinh();
    let root = (p * r).sqrt();
    let d = root / sh;
    // ∂(p r)/∂a = -e^{-s} r + p e^{s}; ∂(p r)/∂b = r - p.
    let da = (-e_minus * r + p * e_plus) / (2.0 * root * sh);
    let db = (r - p) / (2.0 * root * sh);
    (d * scale, da, db)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The quasi-2D equation solved by finite differences (an independent computation): the
    /// extremum of the discrete solution against the closed form, for short and long channels
    /// and with drain bias.
    fn numeric_extremum(a: f64, b: f64, s: f64) -> f64 {
        let n = 4000;
        let h = s / n as f64;
        // Tridiagonal: (ψ_{i-1} - 2ψ_i + ψ_{i+1}) / h² = ψ_i, ψ_0 = a, ψ_n = b (ψ_L = 0).
        let (mut diag, mut rhs) = (vec![-(2.0 + h * h); n - 1], vec![0.0; n - 1]);
        rhs[0] -= a;
        rhs[n - 2] -= b;
        // Thomas algorithm with unit off-diagonals.
        for i in 1..n - 1 {
            let m = 1.0 / diag[i - 1];
            diag[i] -= m;
            rhs[i] -= m * rhs[i - 1];
        }
        let mut psi = vec![0.0; n - 1];
        psi[n - 2] = rhs[n - 2] / diag[n - 2];
        for i in (0..n - 2).rev() {
            psi[i] = (rhs[i] - psi[i + 1]) / diag[i];
        }
        psi.iter().fold(f64::INFINITY, |m, &x| m.min(x))
    }

    #[test]
    fn barrier_top_matches_a_finite_difference_solution() {
        for (a, b, s) in [
            (0.6, 0.6, 1.5),
            (0.6, 1.6, 3.0),
            (0.3, 1.3, 8.0),
            (0.8, 0.9, 0.7),
        ] {
            let (d, _, _) = barrier_shift(a, b, s);
            let num = numeric_extremum(a, b, s);
            // Second-order differences: error ~ h² ψ'''' / 12 and the grid's miss of the
            // minimum, both well under 1e-6 of the ends at 4000 cells.
            assert!((d - num).abs() < 1e-6 * b, "{a} {b} {s}: {d} {num}");
        }
    }

    /// Derivatives against central differences, and the long-channel limit
    /// `2 sqrt(a b) e^{-s/2}`.
    #[test]
    fn derivatives_and_long_channel_limit() {
        let (a, b, s) = (0.5, 1.2, 4.0);
        let (_, da, db) = barrier_shift(a, b, s);
        let h = 1e-6;
        let fa = (barrier_shift(a + h, b, s).0 - barrier_shift(a - h, b, s).0) / (2.0 * h);
        let fb = (barrier_shift(a, b + h, s).0 - barrier_shift(a, b - h, s).0) / (2.0 * h);
        assert!(
            (da - fa).abs() < 1e-8 && (db - fb).abs() < 1e-8,
            "{da} {fa} {db} {fb}"
        );
        let s = 30.0;
        let d = barrier_shift(a, b, s).0;
        let limit = 2.0 * (a * b).sqrt() * (-s / 2.0).exp();
        assert!(((d - limit) / limit).abs() < 1e-9, "{d} {limit}");
        // Mirrored and straddling ends; a drain far above the source moves the extremum onto
        // the source contact, continuously.
        let edge = 0.5 * 4f64.cosh();
        let inside = barrier_shift(0.5, edge * (1.0 - 1e-9), 4.0).0;
        assert!((inside - 0.5).abs() < 1e-4 && barrier_shift(0.5, 3.0 * edge, 4.0).0 == 0.5);
        assert_eq!(barrier_shift(-a, -b, 4.0).0, -barrier_shift(a, b, 4.0).0);
        assert_eq!(barrier_shift(0.4, -0.2, 4.0).0, -0.2);
    }

    /// Yan, Ourmazd and Lee's single-gate length, with layers in series.
    #[test]
    fn natural_length_of_a_layered_stack() {
        let one = natural_length(7.0, 0.65e-9, [(10e-9, 3.9)]);
        assert!((one - (7.0 * 0.65e-9 * 10e-9 / 3.9f64).sqrt()).abs() < 1e-20);
        let two = natural_length(7.0, 0.65e-9, [(5e-9, 3.9), (5e-9, 3.9)]);
        assert!((one - two).abs() < 1e-20);
    }
}
