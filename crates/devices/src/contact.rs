//! Metal contacts to a 2D semiconductor: barrier heights from the metal's work function with
//! Fermi-level pinning, and the current a reservoir injects over and through the barrier.
//!
//! # Barrier heights
//! A pinning factor `S` (0 to 1) mixes the metal's work function `W_M` with the charge
//! neutrality level `Φ_CNL` of the interface states into an effective work function
//! `W_eff = S W_M + (1 - S) Φ_CNL`; the electron barrier is `Φ_n = W_eff - χ` and the hole
//! barrier `Φ_p = χ + E_g - W_eff` (χ the electron affinity, `E_g` the transport gap). `S = 1`
//! is the Schottky-Mott rule, `S = 0` full pinning at the neutrality level (A. M. Cowley and
//! S. M. Sze, "Surface states and barrier height of metal-semiconductor systems", J. Appl. Phys.
//! 36, 3212 (1965); S. M. Sze and K. K. Ng, *Physics of Semiconductor Devices*, 3rd ed., Wiley
//! 2007, sec. 3.2; recalled from memory).
//!
//! # Injection
//! Electrons of a 2D band with valley degeneracy `g_v` and mass `m` cross a barrier along `x`
//! keeping their transverse momentum. Integrating the transverse momentum out gives the current
//! per width from one reservoir with Fermi level `η kT` above the channel's band edge:
//!
//! `J = g_v q sqrt(2m) (kT)^{3/2} / (2 π² ħ²) · I(Δ, η)`,
//! `I(Δ, η) = ∫_0^∞ T(ε) sqrt(π) F_{-1/2}(η - ε) dε`,
//!
//! with energies in units of kT measured from the channel's band edge, `ε` the longitudinal
//! energy, `F_{-1/2}` the normalised Fermi-Dirac integral of order -1/2 and `T(ε)` the
//! transmission of the barrier. The net current of a contact is the difference of the metal's
//! and the channel's injection, `J(η_metal) - J(η_channel)`, so it vanishes in equilibrium.
//! With `T = 1` above the barrier top `Δ` and no tunnelling, and in Boltzmann statistics, it is
//! the 2D thermionic law `J = A₂ T^{3/2} exp(-Φ/kT)`, `A₂ = g_v q sqrt(8 π k³ m) / h²`
//! (A. Anwar, B. Nabet, J. Culp and F. Castro, "Effects of electron confinement on thermionic
//! emission current in a modulation doped heterostructure", J. Appl. Phys. 85, 2663 (1999);
//! recalled from memory); [`richardson_2d`] is that constant.
//!
//! Below the top, `T(ε) = exp(-θ(ε))` with the WKB exponent `θ = 2 ∫ κ dx`,
//! `κ = sqrt(2m (E_C(x) - E)) / ħ`. For the barrier the gate shapes at a contact, the band edge
//! relaxes from the top to the channel's edge over a screening length `λ`:
//! `E_C(x) = Δ e^{-x/λ}` (in kT, from the channel's edge). Then, with `L = λ sqrt(2 m kT) / ħ`,
//!
//! `θ(ε) = 4 L [sqrt(Δ - ε) - sqrt(ε) atan(sqrt((Δ - ε) / ε))]`, `0 < ε < Δ`,
//!
//! (substitute `u = Δ e^{-x/λ}` in the WKB integral), which is 1 at the top and continuous with
//! its first derivative there. [`wkb_exponent`] integrates any profile numerically for checks.

use crate::physics::{f0, logistic, HBAR, K_B, Q};
use std::f64::consts::PI;
use std::sync::OnceLock;

/// Electron and hole barrier heights of a metal contact (J).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Barriers {
    /// From the metal's Fermi level up to the conduction-band edge.
    pub electron: f64,
    /// From the valence-band edge up to the metal's Fermi level.
    pub hole: f64,
}

/// Barrier heights of a metal of work function `metal` on a channel of electron affinity
/// `affinity` and gap `gap`, with pinning factor `pinning` (1: Schottky-Mott, 0: fully pinned at
/// the neutrality level `neutral_level`, an energy below the vacuum level like a work
/// function). Energies in any one unit (the card passes eV); the barriers come out in it.
pub fn barriers(metal: f64, pinning: f64, neutral_level: f64, affinity: f64, gap: f64) -> Barriers {
    let effective = pinning * metal + (1.0 - pinning) * neutral_level;
    Barriers {
        electron: effective - affinity,
        hole: affinity + gap - effective,
    }
}

/// The 2D Richardson constant `A₂ = g_v q sqrt(8 π k³ m) / h²` in A / (m K^{3/2}), for a band of
/// mass `mass` (kg) and valley degeneracy `valleys` (spin included).
pub fn richardson_2d(mass: f64, valleys: f64) -> f64 {
    let h = 2.0 * PI * HBAR;
    valleys * Q * (8.0 * PI * K_B.powi(3) * mass).sqrt() / (h * h)
}

/// The prefactor of [`injection`]: `g_v q sqrt(2m) (kT)^{3/2} / (2 π² ħ²)` in A/m.
pub fn injection_scale(mass: f64, valleys: f64, kt: f64) -> f64 {
    valleys * Q * (2.0 * mass).sqrt() * kt.powf(1.5) / (2.0 * PI * PI * HBAR * HBAR)
}

/// The WKB exponent `θ(ε)` of the exponential barrier of top `delta` (kT units, above the
/// channel's band edge) and reduced length `length` (`λ sqrt(2 m kT) / ħ`) at longitudinal
/// energy `eps` (kT units): 0 at and above the top, and for `eps <= 0` the exponent at the
/// channel's band edge (no state lies below it; callers integrate from 0).
pub fn exponential_barrier_exponent(delta: f64, length: f64, eps: f64) -> f64 {
    if eps >= delta {
        return 0.0;
    }
    if eps <= 0.0 {
        return 4.0 * length * delta.sqrt();
    }
    let over = delta - eps;
    4.0 * length * (over.sqrt() - eps.sqrt() * (over / eps).sqrt().atan())
}

/// The WKB exponent `2 ∫ κ dx` of any barrier `profile(x)` (energy in kT units at position
/// `x`, in units of the reduced length) at energy `eps`, over `[0, x_max]`: the classically
/// forbidden intervals (where `profile > eps`) are found on a grid of `panels` cells and their
/// ends refined by bisection; each is integrated with the substitution
/// `x = x₁ + (x₂ - x₁)(3s² - 2s³)`, which cancels the square-root behaviour at turning points,
/// and composite four-point Gauss-Legendre in `s`. A check for closed forms, not a fast path.
pub fn wkb_exponent(profile: impl Fn(f64) -> f64, eps: f64, x_max: f64, panels: usize) -> f64 {
    let panels = panels.max(1);
    let cell = x_max / panels as f64;
    let inside = |x: f64| profile(x) > eps;
    // The boundary between `a` (inside or not) and `b` (the other), by bisection.
    let edge = |mut a: f64, mut b: f64| {
        let from = inside(a);
        for _ in 0..80 {
            let m = 0.5 * (a + b);
            if inside(m) == from {
                a = m;
            } else {
                b = m;
            }
        }
        0.5 * (a + b)
    };
    let mut total = 0.0;
    let mut start = inside(0.0).then_some(0.0);
    for i in 1..=panels {
        let (a, b) = ((i - 1) as f64 * cell, i as f64 * cell);
        match (
            start,
            inside(b) || (i == panels && start.is_some() && inside(b - 1e-12 * cell)),
        ) {
            (None, true) => start = Some(edge(a, b)),
            (Some(x1), false) => {
                total += forbidden(&profile, eps, x1, edge(a, b));
                start = None;
            }
            _ => {}
        }
    }
    if let Some(x1) = start {
        total += forbidden(&profile, eps, x1, x_max);
    }
    2.0 * total
}

/// `∫ sqrt(profile - eps) dx` over one forbidden interval `[x1, x2]` (see [`wkb_exponent`]).
fn forbidden(profile: &impl Fn(f64) -> f64, eps: f64, x1: f64, x2: f64) -> f64 {
    const PANELS: usize = 64;
    let span = x2 - x1;
    let mut sum = 0.0;
    for p in 0..PANELS {
        let a = p as f64 / PANELS as f64;
        for (t, w) in GL4 {
            let s = a + t / PANELS as f64;
            let x = x1 + span * s * s * (3.0 - 2.0 * s);
            let dx = span * 6.0 * s * (1.0 - s);
            sum += w / PANELS as f64 * dx * (profile(x) - eps).max(0.0).sqrt();
        }
    }
    sum
}

/// Four-point Gauss-Legendre nodes and weights on [0, 1].
const GL4: [(f64, f64); 4] = [
    (0.069_431_844_202_973_71, 0.173_927_422_568_726_93),
    (0.330_009_478_207_571_87, 0.326_072_577_431_273_07),
    (0.669_990_521_792_428_1, 0.326_072_577_431_273_07),
    (0.930_568_155_797_026_3, 0.173_927_422_568_726_93),
];

/// `sqrt(π) F_{-1/2}(a) = ∫ du / (1 + e^{u² - a})` over the real line, by the trapezoidal rule,
/// which converges geometrically for this analytic integrand: the step keeps the error near
/// `e^{-30}` of the value from the distance of the nearest pole, `u² = a ± iπ`, to the real
/// axis (L. N. Trefethen and J. A. C. Weideman, "The exponentially convergent trapezoidal
/// rule", SIAM Review 56, 385 (2014)).
pub fn sqrt_pi_fermi_minus_half(a: f64) -> f64 {
    trapezoid_fermi(a, |u2, a| logistic(a - u2))
}

/// `sqrt(π) F_{1/2}(a) = ∫_{-∞}^{a} sqrt(π) F_{-1/2}(b) db` (normalised integrals:
/// `dF_j/dη = F_{j-1}`), computed as `∫ ln(1 + e^{a - u²}) du` over the real line.
pub fn sqrt_pi_fermi_half(a: f64) -> f64 {
    trapezoid_fermi(a, |u2, a| f0(a - u2))
}

/// The trapezoidal rule's step and last node (`u = n step`) for the Fermi integrands at `a`:
/// the step keeps the error near `e^{-30}` from the distance of the nearest pole
/// (`u² = a ± iπ`) to the real axis, and the nodes reach where `u² - a` exceeds 40.
fn trapezoid_grid(a: f64) -> (f64, usize) {
    let modulus = (a * a + PI * PI).sqrt();
    let distance = ((modulus - a) / 2.0).sqrt();
    let step = (2.0 * PI * distance / 32.0).min(0.25);
    let reach = (a.max(0.0) + 40.0).sqrt();
    (step, (reach / step).ceil() as usize)
}

/// `∫ g(u², a) du` over the real line for the Fermi-like integrands above.
fn trapezoid_fermi(a: f64, g: impl Fn(f64, f64) -> f64) -> f64 {
    let (step, n) = trapezoid_grid(a);
    let mut sum = 0.5 * g(0.0, a);
    for i in 1..=n {
        let u = i as f64 * step;
        sum += g(u * u, a);
    }
    2.0 * sum * step
}

/// `I(Δ, η)` of the module documentation: the injection of a reservoir at `eta` (kT units above
/// the channel's band edge) through the exponential barrier of top `delta` and reduced length
/// `length`. A top at or below the channel's edge (`delta <= 0`) passes every state.
pub fn injection(delta: f64, eta: f64, length: f64) -> f64 {
    let top = delta.max(0.0);
    let over = sqrt_pi_fermi_half(eta - top);
    if top == 0.0 {
        return over;
    }
    let under: f64 = under_nodes(top, length)
        .map(|(eps, w)| {
            let theta = exponential_barrier_exponent(top, length, eps);
            w * (-theta).exp() * sqrt_pi_fermi_minus_half(eta - eps)
        })
        .sum();
    over + under
}

/// `[√π F_{1/2}, √π F_{-1/2}, its derivative, its second derivative]` at `a`, in one
/// trapezoidal pass (`d/da` of `1 / (1 + e^{u² - a})` is `f (1 - f)`, and so on).
fn kernels_direct(a: f64) -> [f64; 4] {
    let (step, n) = trapezoid_grid(a);
    let mut sum = [0.0; 4];
    for i in 0..=n {
        let u = i as f64 * step;
        let x = u * u - a;
        let (f, half) = (logistic(-x), f0(-x));
        let w = if i == 0 { 0.5 } else { 1.0 };
        let g = f * (1.0 - f);
        sum[0] += w * half;
        sum[1] += w * f;
        sum[2] += w * g;
        sum[3] += w * g * (1.0 - 2.0 * f);
    }
    sum.map(|v| 2.0 * v * step)
}

/// The kernels of [`kernels_direct`] on a fine grid, interpolated by cubic Hermite
/// polynomials (each kernel's derivative is the next one); below the grid they are all
/// `√π e^a`, the nondegenerate limit, to a relative `e^a`.
struct Kernels {
    from: f64,
    step: f64,
    values: Vec<[f64; 4]>,
}

/// Kernel grid: `[-130, 100]` in steps of 0.02 (Hermite error about `h⁴/384` of the values).
const KERNEL_FROM: f64 = -130.0;
const KERNEL_TO: f64 = 100.0;
const KERNEL_STEP: f64 = 0.02;

impl Kernels {
    fn get() -> &'static Kernels {
        static K: std::sync::OnceLock<Kernels> = std::sync::OnceLock::new();
        K.get_or_init(|| {
            let n = ((KERNEL_TO - KERNEL_FROM) / KERNEL_STEP).round() as usize;
            let mut values = Vec::with_capacity(n + 1);
            for i in 0..=n {
                let a = KERNEL_FROM + i as f64 * KERNEL_STEP;
                let k = kernels_direct(a);
                values.push(k);
            }
            Kernels {
                from: KERNEL_FROM,
                step: KERNEL_STEP,
                values,
            }
        })
    }

    /// `[H, K0, K1]` at `a`: `H = √π F_{1/2}`, `K0 = √π F_{-1/2} = H'`, `K1 = K0'`.
    fn at(&self, a: f64) -> [f64; 3] {
        let x = (a - self.from) / self.step;
        // Below the grid (or a NaN argument): the nondegenerate limit.
        if x.is_nan() || x < 0.0 {
            let e = PI.sqrt() * a.exp();
            return [e, e, e];
        }
        let i = x.floor() as usize;
        if i + 1 >= self.values.len() {
            let k = kernels_direct(a);
            return [k[0], k[1], k[2]];
        }
        let t = x - i as f64;
        let (l, r) = (&self.values[i], &self.values[i + 1]);
        let h = self.step;
        let (h00, h10, h01, h11) = hermite(t);
        let interp = |j: usize| h00 * l[j] + h10 * h * l[j + 1] + h01 * r[j] + h11 * h * r[j + 1];
        [interp(0), interp(1), interp(2)]
    }
}

/// The cubic Hermite basis on [0, 1]: value at 0, slope at 0, value at 1, slope at 1.
fn hermite(t: f64) -> (f64, f64, f64, f64) {
    let t2 = t * t;
    let t3 = t2 * t;
    (
        2.0 * t3 - 3.0 * t2 + 1.0,
        t3 - 2.0 * t2 + t,
        -2.0 * t3 + 3.0 * t2,
        t3 - t2,
    )
}

/// Slopes of [`hermite`]'s basis with respect to `t`.
fn hermite_slope(t: f64) -> (f64, f64, f64, f64) {
    let t2 = t * t;
    (
        6.0 * t2 - 6.0 * t,
        3.0 * t2 - 4.0 * t + 1.0,
        -6.0 * t2 + 6.0 * t,
        3.0 * t2 - 2.0 * t,
    )
}

/// Gauss-Legendre panels in `φ` (`ε = Δ sin² φ`) under a top `top` kT high: `dε/dφ` is at
/// most `Δ`, so `2 top` panels over `π/2` give under one kT per panel.
fn panels_under(top: f64) -> usize {
    (2.0 * top).ceil().max(16.0) as usize
}

/// The nodes of the sum under a top `top` for reduced length `length`: `(ε, weight)` with
/// `ε = top sin² φ`, which removes the square roots at both ends (`sqrt(ε) = sqrt(top) sin φ`,
/// `sqrt(top - ε) = sqrt(top) cos φ`), and weights including `dε/dφ = top sin 2φ`. Under the
/// top, `θ ≈ 4 L x^{3/2} / (3 Δ)` with `x = Δ - ε`, so for a long barrier the transmission
/// rises from nothing to 1 within `x ~ (3 Δ / 4 L)^{2/3}` of the top, a sliver the panels
/// over the whole range would step over (the slope in `Δ` there is of order one whatever
/// `L`): the last `x0 = 8 (3 Δ / 4 L)^{2/3}` below the top gets [`TOP_PANELS`] panels of its
/// own when it is under a quarter of the top.
fn under_nodes(top: f64, length: f64) -> impl Iterator<Item = (f64, f64)> {
    let half_pi = 0.5 * PI;
    let x0 = 8.0 * (0.75 * top / length.max(1e-300)).powf(2.0 / 3.0);
    // φ where top cos² φ = x0.
    let split = if x0 < 0.25 * top {
        (x0 / top).sqrt().acos()
    } else {
        half_pi
    };
    let panels = panels_under(top);
    let ranges = [
        (0.0, split, panels),
        (split, half_pi, if split < half_pi { TOP_PANELS } else { 0 }),
    ];
    ranges.into_iter().flat_map(move |(from, to, panels)| {
        let width = (to - from) / panels.max(1) as f64;
        (0..panels).flat_map(move |p| {
            GL4.iter().map(move |&(t, w)| {
                let phi = from + (p as f64 + t) * width;
                let (sin, cos) = phi.sin_cos();
                (top * sin * sin, w * width * top * 2.0 * sin * cos)
            })
        })
    })
}

/// Panels of [`under_nodes`] in the sliver below a long barrier's top.
const TOP_PANELS: usize = 16;

/// `[I, ∂I/∂Δ, ∂I/∂η, ∂²I/∂Δ∂η]` of [`injection`] from the kernel tables: the part over the
/// top is `√π F_{1/2}(η - Δ)`, the part under it a Gauss-Legendre sum over `ε = Δ sin² φ`
/// ([`under_nodes`]); `∂θ/∂Δ = 2 L sqrt(Δ - ε) / Δ`, and the boundary terms
/// at the top cancel because `T(Δ) = 1`.
pub fn injection_with_slopes(delta: f64, eta: f64, length: f64) -> [f64; 4] {
    let k = Kernels::get();
    let top = delta.max(0.0);
    let over = k.at(eta - top);
    let mut out = [over[0], 0.0, over[1], 0.0];
    if top == 0.0 {
        return out;
    }
    for (eps, w) in under_nodes(top, length) {
        let trans = (-exponential_barrier_exponent(top, length, eps)).exp();
        let dtheta = 2.0 * length * (top - eps).max(0.0).sqrt() / top;
        let kk = k.at(eta - eps);
        let weight = w * trans;
        out[0] += weight * kk[1];
        out[1] -= weight * dtheta * kk[1];
        out[2] += weight * kk[2];
        out[3] -= weight * dtheta * kk[2];
    }
    out
}

/// [`injection`] for one reduced barrier length, tabulated on a grid of `σ = sqrt(Δ)` (the
/// tunnelling part grows as `Δ^{3/2}` from a flat top, smooth in `σ`) and reservoir levels
/// `η` (kT units) as `ln I` with its slopes and cross slope, interpolated by bicubic Hermite
/// polynomials: value and both slopes continuous. Over a survey of 2400 points inside the grid
/// (reduced length 1.2) the value was within 4e-7 of [`injection_with_slopes`] and the slopes,
/// which are the interpolant's own and so exact for the values returned, within 4e-5 of the
/// direct sum's (relative to the value); the tests check 1e-6 and 1e-4. Below the grid in `η` the
/// reservoir is nondegenerate and `I` scales as `e^η` exactly enough (relative `e^{η_min}`);
/// a top below the channel's edge passes every state (`I` stops depending on `Δ`); beyond the
/// grid the direct sum is used.
#[derive(Debug)]
pub struct InjectionTable {
    length: f64,
    nodes: Vec<OnceLock<Box<[[f64; 4]]>>>,
    rows: usize,
    columns: usize,
}

/// The grid of [`InjectionTable`]: `σ = sqrt(Δ)` from 0 to [`SIGMA_TO`] in steps of
/// [`SIGMA_STEP`], `η` from [`ETA_FROM`] to [`ETA_TO`] in steps of [`GRID_STEP`] kT.
const SIGMA_STEP: f64 = 0.04;
const SIGMA_TO: f64 = 9.0;
const GRID_STEP: f64 = 0.25;
const ETA_FROM: f64 = -25.0;
const ETA_TO: f64 = 60.0;

impl InjectionTable {
    /// The table for reduced length `length` (`λ sqrt(2 m kT) / ħ`). Rows (one `σ` each) are
    /// built when first needed, so a device pays only for the barrier heights it meets (a row
    /// takes a few milliseconds); a row is a function of its grid points alone, so the table's
    /// values do not depend on the order or the thread that builds them.
    pub fn new(length: f64) -> InjectionTable {
        let rows = (SIGMA_TO / SIGMA_STEP).round() as usize + 1;
        let columns = ((ETA_TO - ETA_FROM) / GRID_STEP).round() as usize + 1;
        InjectionTable {
            length,
            nodes: (0..rows).map(|_| OnceLock::new()).collect(),
            rows,
            columns,
        }
    }

    /// Row `r`: `[ln I, ∂/∂σ, ∂/∂η, ∂²/∂σ∂η]` at every `η` of the grid.
    fn row(&self, r: usize) -> &[[f64; 4]] {
        self.nodes[r].get_or_init(|| {
            let sigma = r as f64 * SIGMA_STEP;
            (0..self.columns)
                .map(|c| {
                    let e = ETA_FROM + c as f64 * GRID_STEP;
                    let [i, i_d, i_e, i_de] = injection_with_slopes(sigma * sigma, e, self.length);
                    // Slopes in σ: ∂/∂σ = 2σ ∂/∂Δ.
                    let (g_d, g_e) = (i_d / i, i_e / i);
                    [
                        i.ln(),
                        2.0 * sigma * g_d,
                        g_e,
                        2.0 * sigma * (i_de / i - g_d * g_e),
                    ]
                })
                .collect()
        })
    }

    /// `[I, ∂I/∂Δ, ∂I/∂η]` at barrier top `delta` and reservoir level `eta` (kT units).
    pub fn eval(&self, delta: f64, eta: f64) -> [f64; 3] {
        let d = delta.max(0.0);
        let sigma = d.sqrt();
        if sigma > SIGMA_TO - SIGMA_STEP || eta > ETA_TO - GRID_STEP {
            let [i, i_d, i_e, _] = injection_with_slopes(d, eta, self.length);
            return [i, i_d, i_e];
        }
        // Nondegenerate below the grid: ln I grows one-for-one with η.
        let (e, shift) = if eta < ETA_FROM {
            (ETA_FROM, eta - ETA_FROM)
        } else {
            (eta, 0.0)
        };
        let x = sigma / SIGMA_STEP;
        let y = (e - ETA_FROM) / GRID_STEP;
        let (r, c) = (
            (x.floor() as usize).min(self.rows - 2),
            (y.floor() as usize).min(self.columns - 2),
        );
        let (tx, ty) = (x - r as f64, y - c as f64);
        let (hs, h) = (SIGMA_STEP, GRID_STEP);
        let (a0, b0, a1, b1) = hermite(tx);
        let (da0, db0, da1, db1) = hermite_slope(tx);
        let (c0, e0, c1, e1) = hermite(ty);
        let (dc0, de0, dc1, de1) = hermite_slope(ty);
        let near = [self.row(r), self.row(r + 1)];
        let node = |i: usize, j: usize| &near[i][c + j];
        // Basis in σ (value, slope) per end, then in η.
        let ax = [[a0, b0 * hs], [a1, b1 * hs]];
        let dax = [[da0 / hs, db0], [da1 / hs, db1]];
        let ay = [[c0, e0 * h], [c1, e1 * h]];
        let day = [[dc0 / h, de0], [dc1 / h, de1]];
        let (mut g, mut g_d, mut g_e) = (0.0, 0.0, 0.0);
        for i in 0..2 {
            for j in 0..2 {
                let n = node(i, j);
                // n = [value, ∂σ, ∂η, ∂σ∂η].
                let terms = [(n[0], 0, 0), (n[1], 1, 0), (n[2], 0, 1), (n[3], 1, 1)];
                for (v, kx, ky) in terms {
                    g += v * ax[i][kx] * ay[j][ky];
                    g_d += v * dax[i][kx] * ay[j][ky];
                    g_e += v * ax[i][kx] * day[j][ky];
                }
            }
        }
        if shift != 0.0 {
            g += shift;
            g_e = 1.0;
        }
        // ∂/∂Δ = ∂/∂σ / 2σ; at a flat top (σ = 0) the slope in Δ is zero.
        let g_delta = if sigma > 0.0 {
            g_d / (2.0 * sigma)
        } else {
            0.0
        };
        let i = g.exp();
        [i, i * g_delta, i * g_e]
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::physics::M0;
    use quadrature::double_exponential::integrate;

    /// The Fermi integrals against an independent double-exponential quadrature of their
    /// defining integrals, from the nondegenerate to the degenerate range.
    #[test]
    fn fermi_integrals_match_quadrature() {
        for a in [-30.0, -5.0, -1.0, 0.0, 0.7, 3.0, 12.0, 60.0] {
            let reach = (f64::max(a, 0.0) + 40.0f64).sqrt();
            // Absolute targets scaled to the values (e^a when nondegenerate).
            let size = f64::min(a, 0.0).exp() * f64::max(a, 1.0);
            // Split where the degenerate integrand steps down (u² = a).
            let step = f64::max(a, 0.0).sqrt();
            let both = |f: &dyn Fn(f64) -> f64| {
                2.0 * (integrate(f, 0.0, step, 1e-15 * size).integral
                    + integrate(f, step, reach, 1e-15 * size).integral)
            };
            let minus_half = both(&|u: f64| 1.0 / (1.0 + (u * u - a).exp()));
            let half = both(&|u: f64| {
                let x = a - u * u;
                if x > 0.0 {
                    x + (-x).exp().ln_1p()
                } else {
                    x.exp().ln_1p()
                }
            });
            let rel = |x: f64, y: f64| ((x - y) / y).abs();
            assert!(
                rel(sqrt_pi_fermi_minus_half(a), minus_half) < 1e-10,
                "a = {a}: {} {minus_half}",
                sqrt_pi_fermi_minus_half(a)
            );
            assert!(
                rel(sqrt_pi_fermi_half(a), half) < 1e-10,
                "a = {a}: {} {half}",
                sqrt_pi_fermi_half(a)
            );
        }
    }

    /// Pinning factor 1 is the Schottky-Mott rule and 0 pins the metal at the neutrality level
    /// whatever its work function (Cowley and Sze 1965).
    #[test]
    fn pinning_limits() {
        let ev = Q;
        let (chi, gap, cnl) = (4.2 * ev, 2.4 * ev, 4.6 * ev);
        let free = barriers(5.1 * ev, 1.0, cnl, chi, gap);
        assert!((free.electron - 0.9 * ev).abs() < 1e-12 * ev);
        assert!((free.hole - 1.5 * ev).abs() < 1e-12 * ev);
        for metal in [4.0, 4.5, 5.6] {
            let pinned = barriers(metal * ev, 0.0, cnl, chi, gap);
            assert!((pinned.electron - 0.4 * ev).abs() < 1e-12 * ev);
            assert!((pinned.electron + pinned.hole - gap).abs() < 1e-12 * ev);
        }
    }

    /// The exponential barrier's closed-form exponent against a numerical WKB integral of the
    /// same profile, and the numerical WKB integral against the closed forms of a rectangular
    /// barrier (`2 κ d`) and a triangular one (`(4/3) sqrt(ε_b)^3 / f` for a barrier falling
    /// from `ε_b` at slope `f`, the Fowler-Nordheim exponent; Sze and Ng 2007, recalled).
    #[test]
    fn wkb_exponents_match_closed_forms() {
        let (delta, length) = (12.0, 0.8);
        for eps in [0.05, 1.0, 5.0, 11.9] {
            let closed = exponential_barrier_exponent(delta, length, eps);
            let numeric = length * wkb_exponent(|x| delta * (-x).exp(), eps, 40.0, 4000);
            assert!(
                ((closed - numeric) / closed).abs() < 1e-6,
                "{eps}: {closed} {numeric}"
            );
        }
        let rect = wkb_exponent(|x| if x < 3.0 { 7.0 } else { 0.0 }, 2.0, 3.0, 10);
        assert!((rect - 2.0 * 5f64.sqrt() * 3.0).abs() < 1e-12);
        let (top, slope) = (9.0, 2.0);
        let tri = wkb_exponent(|x| top - slope * x, 0.0, 2.0 * top / slope, 400);
        let fowler = 4.0 / 3.0 * top.powf(1.5) / slope;
        assert!(((tri - fowler) / fowler).abs() < 1e-9, "{tri} {fowler}");
    }

    /// Over the top alone (no tunnelling) and from a nondegenerate reservoir, the injected current is the 2D thermionic law of Anwar et al.
    /// 1999; the Richardson constant itself against an independent integration of the flux of
    /// a 2D Maxwell-Boltzmann gas over the half plane `v_x > 0`.
    #[test]
    fn thermionic_limit_is_the_2d_richardson_law() {
        let (m, gv, t) = (0.5 * M0, 2.0, 300.0);
        let kt = K_B * t;
        let (phi, eta) = (8.0, -20.0);
        let j = injection_scale(m, gv, kt) * sqrt_pi_fermi_half(eta - phi);
        let law = richardson_2d(m, gv) * t.powf(1.5) * (eta - phi).exp();
        assert!(((j - law) / law).abs() < 1e-8, "{j} {law}");
        // A long barrier still passes electrons just under its top, where it is thin: with
        // `x = Δ - ε` small, `θ ≈ 4 L x^{3/2} / (3Δ)`, so tunnelling adds the fraction
        // `∫ e^{-θ} dx = Γ(5/3) (3Δ / 4L)^{2/3}` of the thermionic current (our expansion of
        // the closed form; corrections of relative order x, here under 1 %).
        let length = 1e4;
        let long = injection_scale(m, gv, kt) * injection(phi, eta, length);
        let gamma_5_3 = 0.902_745_292_950_934; // Γ(5/3), recalled from memory
        let added = gamma_5_3 * (3.0 * phi / (4.0 * length)).powf(2.0 / 3.0);
        assert!(
            (((long - j) / j) / added - 1.0).abs() < 0.02,
            "{long} {j} {added}"
        );
        // Flux q g ∫∫ v_x f d²k / (2π)² with f = e^{η - E/kT}, E = ħ² k² / 2m, over k_x > 0.
        let g = 2.0 * gv;
        let kscale = (2.0 * m * kt).sqrt() / HBAR;
        let inner = |kx: f64| {
            integrate(|ky: f64| (-(kx * kx + ky * ky)).exp(), -10.0, 10.0, 1e-15).integral
        };
        let flux = eta.exp() * integrate(|kx: f64| kx * inner(kx), 0.0, 10.0, 1e-15).integral;
        // v_x = ħ k_x / m with k = kscale · (dimensionless).
        let direct = Q * g / (4.0 * PI * PI) * HBAR * kscale.powi(3) / m * flux;
        let law = richardson_2d(m, gv) * t.powf(1.5) * eta.exp();
        assert!(((direct - law) / law).abs() < 1e-9, "{direct} {law}");
    }

    /// Tunnelling adds to the thermionic current and the total falls as the barrier lengthens;
    /// a top at the channel's edge passes everything.
    #[test]
    fn tunnelling_adds_current_under_the_top() {
        let (delta, eta) = (10.0, 2.0);
        let thin = injection(delta, eta, 0.3);
        let thick = injection(delta, eta, 3.0);
        let over = sqrt_pi_fermi_half(eta - delta);
        assert!(thin > thick && thick > over, "{thin} {thick} {over}");
        assert_eq!(injection(-1.0, eta, 0.3), sqrt_pi_fermi_half(eta));
    }

    /// The kernel tables against their direct sums, and the slopes of the direct injection
    /// sum against central differences of itself.
    #[test]
    fn kernels_and_slopes_are_consistent() {
        let k = Kernels::get();
        for a in [-100.0, -20.0, -3.3, 0.01, 2.7, 15.0, 55.5] {
            let t = k.at(a);
            let d = kernels_direct(a);
            for j in 0..3 {
                assert!(
                    ((t[j] - d[j]) / d[j]).abs() < 1e-8,
                    "{a} {j}: {} {}",
                    t[j],
                    d[j]
                );
            }
        }
        // Δ where the panel count (ceil 2Δ) does not change across the differences.
        let (delta, eta, length) = (9.3, 1.5, 0.7);
        let [i, i_d, i_e, i_de] = injection_with_slopes(delta, eta, length);
        assert!(((i - injection(delta, eta, length)) / i).abs() < 1e-8);
        let h = 1e-4;
        let f = |d: f64, e: f64| injection_with_slopes(d, e, length)[0];
        let fd = (f(delta + h, eta) - f(delta - h, eta)) / (2.0 * h);
        let fe = (f(delta, eta + h) - f(delta, eta - h)) / (2.0 * h);
        let fde = (f(delta + h, eta + h) - f(delta + h, eta - h) - f(delta - h, eta + h)
            + f(delta - h, eta - h))
            / (4.0 * h * h);
        assert!(((i_d - fd) / i_d).abs() < 1e-6, "{i_d} {fd}");
        assert!(((i_e - fe) / i_e).abs() < 1e-6, "{i_e} {fe}");
        assert!(((i_de - fde) / i_de).abs() < 1e-4, "{i_de} {fde}");
    }

    /// The table against the direct sum between its nodes, below its range in η, and at
    /// tops below the channel's edge.
    #[test]
    fn table_matches_the_direct_sum() {
        let length = 1.2;
        let table = InjectionTable::new(length);
        for (d, e) in [
            (0.3, -2.2),
            (7.77, 3.1),
            (20.25, -24.0),
            (41.3, 12.6),
            (3.1, 44.4),
        ] {
            let t = table.eval(d, e);
            let x = injection_with_slopes(d, e, length);
            // Values within 1e-6; slopes (the interpolant's own, exact for the values it
            // returns) within 1e-4 of the direct sum's, relative to the value.
            for (j, tol) in [(0, 1e-6), (1, 1e-4), (2, 1e-4)] {
                let err = ((t[j] - x[j]) / x[0]).abs();
                assert!(err < tol, "{d} {e} {j}: {} {}", t[j], x[j]);
            }
        }
        let deep = table.eval(5.0, -40.0);
        let x = injection_with_slopes(5.0, -40.0, length);
        assert!(((deep[0] - x[0]) / x[0]).abs() < 1e-9);
        assert_eq!(table.eval(-2.0, 1.0)[1], 0.0);
        assert!(
            ((table.eval(-2.0, 1.0)[0] - table.eval(0.0, 1.0)[0]) / table.eval(0.0, 1.0)[0]).abs()
                < 1e-12
        );
    }
}
