//! Linearisation at an operating point, for small-signal analysis and operating-point insight.
//!
//! At a DC solution `x` the system `F(x, t) = f(x) + dq(x)/dt` linearises to
//! `(G + s C) δx = δ(sources)` with `G = ∂f/∂x` and `C = ∂q/∂x`, the same derivatives every
//! element already returns for Newton ([`System::linearize`]; no gmin is added). One element is
//! seen from its terminals by eliminating its internal unknowns (a Schur complement,
//! [`ElementLinearization::terminal_admittance`]): a contact resistance then appears in the
//! terminal `g_m`, `g_ds` and capacitances exactly as a measurement at the pins would see it.

use crate::circuit::ElementId;
use crate::element::{EvalContext, Stamp};
use crate::error::EngineError;
use crate::system::{System, NONE32};
use faer::c64;

/// The conductance and capacitance matrices of the whole system at one solution, both in the
/// system's sparsity pattern (compressed columns, unknowns in the system's order).
#[derive(Clone, Debug)]
pub struct Linearization {
    /// `G = ∂f/∂x` (S for node rows and columns).
    pub g: sprs::CsMat<f64>,
    /// `C = ∂q/∂x` (F for node rows and columns).
    pub c: sprs::CsMat<f64>,
}

/// One element evaluated at a solution: its local unknowns (terminal voltages first, then
/// internal unknowns), the static and dynamic parts and their derivatives, row-major.
#[derive(Clone, Debug, PartialEq)]
pub struct ElementLinearization {
    /// Number of terminals (the first local unknowns).
    pub terminals: usize,
    /// Local unknowns.
    pub x: Vec<f64>,
    /// Static part: terminal currents into the element (A), then internal equations.
    pub f: Vec<f64>,
    /// Dynamic part: terminal charges (C), then internal charges or fluxes.
    pub q: Vec<f64>,
    /// `∂f/∂x`, row-major.
    pub df: Vec<f64>,
    /// `∂q/∂x`, row-major.
    pub dq: Vec<f64>,
}

impl ElementLinearization {
    /// Number of local unknowns.
    pub fn len(&self) -> usize {
        self.x.len()
    }

    /// Whether the element has no local unknowns.
    pub fn is_empty(&self) -> bool {
        self.x.is_empty()
    }

    /// DC currents flowing from each terminal's node into the element (A).
    pub fn terminal_currents(&self) -> &[f64] {
        &self.f[..self.terminals]
    }

    /// Charges held at each terminal (C).
    pub fn terminal_charges(&self) -> &[f64] {
        &self.q[..self.terminals]
    }

    /// The terminal admittance matrix `Y(jω)` (row-major, `terminals × terminals`): entry
    /// `(r, c)` is the small-signal current into terminal `r` per volt at terminal `c`, the
    /// element's internal unknowns eliminated. `None` when the internal block is singular
    /// (an ideal voltage source's own branch, for example: it has no finite admittance).
    pub fn terminal_admittance(&self, omega: f64) -> Option<Vec<c64>> {
        let n = self.len();
        let y: Vec<c64> = self
            .df
            .iter()
            .zip(&self.dq)
            .map(|(&g, &c)| c64::new(g, omega * c))
            .collect();
        schur(&y, n, self.terminals)
    }

    /// The quasi-static terminal conductances `G_t` and capacitances `C_t` (row-major,
    /// `terminals × terminals`): `Y(jω) = G_t + jω C_t + O(ω²)`, internal unknowns eliminated.
    /// Entry `(r, c)` of `C_t` is `∂Q_r/∂V_c` seen at the pins. `None` when the internal block
    /// is singular.
    pub fn quasi_static(&self) -> Option<(Vec<f64>, Vec<f64>)> {
        let (n, nt) = (self.len(), self.terminals);
        let ni = n - nt;
        let at = |m: &[f64], r: usize, c: usize| m[r * n + c];
        let g0: Vec<f64> = (0..nt)
            .flat_map(|r| (0..nt).map(move |c| (r, c)))
            .map(|(r, c)| at(&self.df, r, c))
            .collect();
        let c0: Vec<f64> = (0..nt)
            .flat_map(|r| (0..nt).map(move |c| (r, c)))
            .map(|(r, c)| at(&self.dq, r, c))
            .collect();
        if ni == 0 {
            return Some((g0, c0));
        }
        // P = G_ii⁻¹ G_it (ni × nt) and R = G_ti G_ii⁻¹ (nt × ni), then
        // G_t = G_tt - G_ti P and C_t = C_tt - C_ti P - R C_it + R C_ii P.
        let block = |m: &[f64], r0: usize, nr: usize, c0: usize, nc: usize| -> Vec<c64> {
            (0..nr)
                .flat_map(|r| (0..nc).map(move |c| (r, c)))
                .map(|(r, c)| c64::new(m[(r0 + r) * n + c0 + c], 0.0))
                .collect()
        };
        let gii = block(&self.df, nt, ni, nt, ni);
        let mut p = block(&self.df, nt, ni, 0, nt);
        solve(&mut gii.clone(), ni, &mut p, nt)?;
        // R^T = G_ii^-T G_ti^T.
        let mut giit = vec![c64::new(0.0, 0.0); ni * ni];
        for r in 0..ni {
            for c in 0..ni {
                giit[c * ni + r] = gii[r * ni + c];
            }
        }
        let mut rt = vec![c64::new(0.0, 0.0); ni * nt];
        for k in 0..ni {
            for t in 0..nt {
                rt[k * nt + t] = c64::new(at(&self.df, t, nt + k), 0.0);
            }
        }
        solve(&mut giit, ni, &mut rt, nt)?;
        let pm = |k: usize, c: usize| p[k * nt + c].re;
        let rm = |r: usize, k: usize| rt[k * nt + r].re;
        let mut g = g0;
        let mut cap = c0;
        for r in 0..nt {
            for c in 0..nt {
                let mut gs = 0.0;
                let mut cs = 0.0;
                for k in 0..ni {
                    gs += at(&self.df, r, nt + k) * pm(k, c);
                    cs += at(&self.dq, r, nt + k) * pm(k, c) + rm(r, k) * at(&self.dq, nt + k, c);
                    for l in 0..ni {
                        cs -= rm(r, k) * at(&self.dq, nt + k, nt + l) * pm(l, c);
                    }
                }
                g[r * nt + c] -= gs;
                cap[r * nt + c] -= cs;
            }
        }
        Some((g, cap))
    }
}

/// `Y_tt - Y_ti Y_ii⁻¹ Y_it` of the row-major `n × n` matrix `y` whose first `nt` unknowns are
/// kept; `None` when `Y_ii` is singular.
fn schur(y: &[c64], n: usize, nt: usize) -> Option<Vec<c64>> {
    let ni = n - nt;
    let mut out: Vec<c64> = (0..nt)
        .flat_map(|r| (0..nt).map(move |c| y[r * n + c]))
        .collect();
    if ni == 0 {
        return Some(out);
    }
    let mut yii: Vec<c64> = (0..ni)
        .flat_map(|r| (0..ni).map(move |c| y[(nt + r) * n + nt + c]))
        .collect();
    let mut p: Vec<c64> = (0..ni)
        .flat_map(|r| (0..nt).map(move |c| y[(nt + r) * n + c]))
        .collect();
    solve(&mut yii, ni, &mut p, nt)?;
    for r in 0..nt {
        for c in 0..nt {
            let mut s = c64::new(0.0, 0.0);
            for k in 0..ni {
                s += y[r * n + nt + k] * p[k * nt + c];
            }
            out[r * nt + c] -= s;
        }
    }
    Some(out)
}

/// Solves `A X = B` in place (`A` is `n × n`, `B` is `n × m`, both row-major) by Gaussian
/// elimination with partial pivoting; `None` when a pivot vanishes relative to the matrix.
fn solve(a: &mut [c64], n: usize, b: &mut [c64], m: usize) -> Option<()> {
    let scale = a.iter().map(|v| v.norm()).fold(0.0, f64::max);
    if !(scale > 0.0 && scale.is_finite()) {
        return None;
    }
    for k in 0..n {
        let (piv, big) = (k..n)
            .map(|r| (r, a[r * n + k].norm()))
            .fold((k, -1.0), |acc, v| if v.1 > acc.1 { v } else { acc });
        if big <= scale * 1e-14 {
            return None;
        }
        if piv != k {
            for c in 0..n {
                a.swap(k * n + c, piv * n + c);
            }
            for c in 0..m {
                b.swap(k * m + c, piv * m + c);
            }
        }
        let d = a[k * n + k];
        for r in k + 1..n {
            let f = a[r * n + k] / d;
            if f == c64::new(0.0, 0.0) {
                continue;
            }
            for c in k..n {
                let v = a[k * n + c];
                a[r * n + c] -= f * v;
            }
            for c in 0..m {
                let v = b[k * m + c];
                b[r * m + c] -= f * v;
            }
        }
    }
    for k in (0..n).rev() {
        let d = a[k * n + k];
        for c in 0..m {
            let mut s = b[k * m + c];
            for j in k + 1..n {
                s -= a[k * n + j] * b[j * m + c];
            }
            b[k * m + c] = s / d;
        }
    }
    Some(())
}

impl System {
    /// Evaluates one element at the solution `x` (a DC context) and returns its local view.
    pub fn element_linearization(
        &self,
        x: &[f64],
        element: ElementId,
    ) -> Result<ElementLinearization, EngineError> {
        self.check_len(x)?;
        let e = element.index();
        let el = self
            .elements
            .get(e)
            .ok_or_else(|| EngineError::Invalid("the element belongs to another circuit".into()))?;
        let map = self.layout.local(e);
        let n = map.len();
        let xl: Vec<f64> = map
            .iter()
            .map(|&g| if g == NONE32 { 0.0 } else { x[g as usize] })
            .collect();
        let (mut f, mut q, mut df, mut dq) = (
            vec![0.0; n],
            vec![0.0; n],
            vec![0.0; n * n],
            vec![0.0; n * n],
        );
        el.evaluate(
            &xl,
            &EvalContext::dc(),
            &mut Stamp::new(&mut f, &mut q, &mut df, &mut dq),
        );
        Ok(ElementLinearization {
            terminals: el.terminals().len(),
            x: xl,
            f,
            q,
            df,
            dq,
        })
    }

    /// The conductance and capacitance matrices at the solution `x` (a DC context, no gmin).
    pub fn linearize(&self, x: &[f64]) -> Result<Linearization, EngineError> {
        self.check_len(x)?;
        let nnz = self.pattern.row_idx().len();
        let (mut g, mut c) = (vec![0.0; nnz], vec![0.0; nnz]);
        for (e, plan) in self.layout.plan.iter().enumerate() {
            let lin = self.element_linearization(x, ElementId(e))?;
            let nl = plan.local as usize;
            let slots = &self.layout.slots32[plan.slot as usize..][..nl * nl];
            for (k, &s) in slots.iter().enumerate() {
                if s != NONE32 {
                    g[s as usize] += lin.df[k];
                    c[s as usize] += lin.dq[k];
                }
            }
        }
        let csc = |v: Vec<f64>| {
            sprs::CsMat::new_csc(
                (self.n, self.n),
                self.pattern.col_ptr().to_vec(),
                self.pattern.row_idx().to_vec(),
                v,
            )
        };
        Ok(Linearization {
            g: csc(g),
            c: csc(c),
        })
    }

    /// The element's extra operating-point quantities ([`crate::Element::details`]) at the
    /// local unknowns of its linearisation (no second evaluation).
    pub fn element_details(
        &self,
        element: ElementId,
        lin: &ElementLinearization,
    ) -> Vec<crate::element::Detail> {
        self.elements[element.index()].details(&lin.x)
    }

    /// Every node but ground with its voltage in the solution `x`, in creation order.
    pub fn node_voltages<'a>(&'a self, x: &'a [f64]) -> impl Iterator<Item = (&'a str, f64)> {
        (0..self.n_nodes).map(move |i| (self.node_names.get(i + 1), x[i]))
    }

    /// Every element, in circuit order.
    pub fn elements(&self) -> impl Iterator<Item = ElementId> {
        (0..self.elements.len()).map(ElementId)
    }

    /// An element's name.
    pub fn element_label(&self, element: ElementId) -> &str {
        self.element_name(element.index())
    }

    /// An element's kind, such as `"resistor"`.
    pub fn element_kind(&self, element: ElementId) -> &'static str {
        self.elements[element.index()].kind()
    }

    /// An element's terminal names.
    pub fn element_terminals(&self, element: ElementId) -> &'static [&'static str] {
        self.elements[element.index()].terminals()
    }

    /// Whether an element is an independent source.
    pub fn is_independent_source(&self, element: ElementId) -> bool {
        self.elements[element.index()].is_independent_source()
    }

    fn check_len(&self, x: &[f64]) -> Result<(), EngineError> {
        if x.len() == self.n {
            Ok(())
        } else {
            Err(EngineError::Invalid(format!(
                "expected {} unknowns, got {}",
                self.n,
                x.len()
            )))
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::elements::{Capacitor, Resistor, VoltageSource};
    use crate::{Circuit, OpParams};

    /// A resistor in series with a capacitor seen as one element's view is checked by hand
    /// here through a two-element divider: node `mid` has G = 1/R1 + 1/R2, C = C1.
    #[test]
    fn system_matrices_hold_each_elements_derivatives() {
        let mut c = Circuit::new();
        let top = c.node("top");
        let mid = c.node("mid");
        c.add("v", VoltageSource::dc(1.0), &[top, Circuit::GROUND])
            .unwrap();
        c.add("r1", Resistor::new(1e3), &[top, mid]).unwrap();
        c.add("r2", Resistor::new(3e3), &[mid, Circuit::GROUND])
            .unwrap();
        c.add("c1", Capacitor::new(2e-12), &[mid, Circuit::GROUND])
            .unwrap();
        let mut sys = System::new(c).unwrap();
        let (sol, _) = sys.operating_point(&OpParams::default()).unwrap();
        let lin = sys.linearize(&sol.x).unwrap();
        let m = sys.node_unknown(sys.find_node("mid").unwrap()).unwrap();
        let t = sys.node_unknown(sys.find_node("top").unwrap()).unwrap();
        assert!((lin.g.get(m, m).copied().unwrap() - (1e-3 + 1.0 / 3e3)).abs() < 1e-15);
        assert!((lin.g.get(m, t).copied().unwrap() + 1e-3).abs() < 1e-15);
        assert_eq!(lin.c.get(m, m).copied(), Some(2e-12));
        let r1 = sys.element_linearization(&sol.x, sys.find_element("r1").unwrap());
        let r1 = r1.unwrap();
        assert!((r1.terminal_currents()[0] - 0.25e-3).abs() < 1e-12);
        let (g, cap) = r1.quasi_static().unwrap();
        assert_eq!(g, vec![1e-3, -1e-3, -1e-3, 1e-3]);
        assert_eq!(cap, vec![0.0; 4]);
        let v = sys.element_linearization(&sol.x, sys.find_element("v").unwrap());
        assert!(v.unwrap().terminal_admittance(1.0).is_none());
    }

    /// An element with an internal node: a series resistor R into a capacitor C, seen at its
    /// two pins, is `Y = jωC / (1 + jωRC)`; quasi-statically G = 0 and C_t = C.
    #[test]
    fn internal_unknowns_are_eliminated() {
        // Local unknowns: pin a, pin b, internal m. R between a and m, C between m and b.
        let (r, cap) = (1e3, 1e-9);
        let g = 1.0 / r;
        let lin = ElementLinearization {
            terminals: 2,
            x: vec![0.0; 3],
            f: vec![0.0; 3],
            q: vec![0.0; 3],
            df: vec![g, 0.0, -g, 0.0, 0.0, 0.0, -g, 0.0, g],
            dq: vec![0.0, 0.0, 0.0, 0.0, cap, -cap, 0.0, -cap, cap],
        };
        let w = 1.0 / (r * cap);
        let y = lin.terminal_admittance(w).unwrap();
        let jwc = c64::new(0.0, w * cap);
        let want = jwc / (c64::new(1.0, 0.0) + c64::new(0.0, w * r * cap));
        assert!((y[0] - want).norm() < 1e-15);
        assert!((y[1] + want).norm() < 1e-15);
        let (gt, ct) = lin.quasi_static().unwrap();
        assert!(gt.iter().all(|v| v.abs() < 1e-18));
        assert!((ct[0] - cap).abs() < 1e-24 && (ct[1] + cap).abs() < 1e-24);
    }
}
