//! Maximum-square static noise margin of two transfer curves by the 45-degree rotation of
//! E. Seevinck, F. J. List and J. Lohstroh, "Static-noise margin analysis of MOS SRAM cells",
//! IEEE J. Solid-State Circuits SC-22(5), 748-754 (1987).
//!
//! The butterfly is curve 1 drawn as `y = f1(x)` and curve 2 mirrored, `x = f2(y)`. Rotating
//! both by 45 degrees, `u = (x - y)/√2`, `v = (x + y)/√2`, makes each monotone falling curve a
//! single-valued `v(u)`. The side of the largest square that fits in a lobe between the two is
//! `max |v1(u) - v2(u)| / √2` over the `u` range where the difference keeps one sign; the
//! margin of the pair is the smaller of its two lobes.

/// Opposite corners `(x, y)` of a square in the butterfly's coordinates.
pub type Square = ((f64, f64), (f64, f64));

/// The maximum-square margins of a butterfly.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct NoiseMargin {
    /// The smaller lobe's square side (V): the static noise margin.
    pub snm: f64,
    /// The lobe where curve 1 lies above the mirrored curve 2 (V).
    pub upper_lobe: f64,
    /// The other lobe (V).
    pub lower_lobe: f64,
    /// Opposite corners `(x, y)` of the largest square in each lobe (upper, lower), in the
    /// butterfly's coordinates (curve 1's input and output).
    pub squares: [Square; 2],
}

/// Interpolates `v` at `u` on a polyline sorted by increasing `u`.
fn at(us: &[f64], vs: &[f64], u: f64) -> Option<f64> {
    if us.is_empty() || u < us[0] || u > us[us.len() - 1] {
        return None;
    }
    let k = us.partition_point(|&x| x <= u).min(us.len() - 1).max(1);
    let (u0, u1, v0, v1) = (us[k - 1], us[k], vs[k - 1], vs[k]);
    Some(if u1 > u0 {
        v0 + (v1 - v0) * (u - u0) / (u1 - u0)
    } else {
        v0
    })
}

/// The maximum-square margins of transfer curves `(x1, y1)` and `(x2, y2)` (inputs increasing,
/// outputs falling). For an inverter against itself pass the same curve twice. Returns `None`
/// if the curves do not form two lobes (the pair has no two stable states).
pub fn butterfly(x1: &[f64], y1: &[f64], x2: &[f64], y2: &[f64]) -> Option<NoiseMargin> {
    let s = std::f64::consts::FRAC_1_SQRT_2;
    // Curve 1: points (x, f1(x)).
    let mut a: Vec<(f64, f64)> = x1
        .iter()
        .zip(y1)
        .map(|(&x, &y)| ((x - y) * s, (x + y) * s))
        .collect();
    // Curve 2 mirrored: points (f2(y), y) with y the input of curve 2.
    let mut b: Vec<(f64, f64)> = x2
        .iter()
        .zip(y2)
        .map(|(&y, &x)| ((x - y) * s, (x + y) * s))
        .collect();
    a.sort_by(|p, q| p.0.total_cmp(&q.0));
    b.sort_by(|p, q| p.0.total_cmp(&q.0));
    let (au, av): (Vec<f64>, Vec<f64>) = a.into_iter().unzip();
    let (bu, bv): (Vec<f64>, Vec<f64>) = b.into_iter().unzip();
    // A common grid over the overlap of both u ranges, with every sample of either curve.
    let lo = au.first()?.max(*bu.first()?);
    let hi = au.last()?.min(*bu.last()?);
    if hi <= lo {
        return None;
    }
    let mut grid: Vec<f64> = au
        .iter()
        .chain(&bu)
        .copied()
        .filter(|&u| u >= lo && u <= hi)
        .collect();
    grid.sort_by(f64::total_cmp);
    grid.dedup();
    let mut us = Vec::with_capacity(grid.len());
    let mut vas = Vec::with_capacity(grid.len());
    let mut d = Vec::with_capacity(grid.len());
    for &u in &grid {
        if let (Some(va), Some(vb)) = (at(&au, &av, u), at(&bu, &bv, u)) {
            us.push(u);
            vas.push(va);
            d.push(va - vb);
        }
    }
    let scale = d.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    if d.len() < 3 || scale == 0.0 {
        return None;
    }
    // Lobes are the stretches between crossings of the two curves. The outermost stretches
    // count only where the curves meet at the end of their common range (the rails); otherwise
    // they are open and enclose no square.
    let meets = |v: f64| v.abs() <= 1e-3 * scale + 1e-12;
    let mut segments: Vec<(usize, usize)> = Vec::new();
    let mut start = 0;
    for k in 1..d.len() {
        if (d[k] > 0.0) != (d[start] > 0.0) && d[k] != 0.0 {
            segments.push((start, k - 1));
            start = k;
        }
    }
    segments.push((start, d.len() - 1));
    let last = segments.len() - 1;
    let (mut up, mut down) = (0.0f64, 0.0f64);
    let (mut k_up, mut k_down) = (0usize, 0usize);
    for (i, &(a, b)) in segments.iter().enumerate() {
        let bounded = (i > 0 || meets(d[0])) && (i < last || meets(d[d.len() - 1]));
        if !bounded {
            continue;
        }
        let k = (a..=b)
            .max_by(|&i, &j| d[i].abs().total_cmp(&d[j].abs()))
            .unwrap_or(a);
        let peak = d[k].abs();
        if d[a] > 0.0 || d[b] > 0.0 {
            if peak > up {
                up = peak;
                k_up = k;
            }
        } else if peak > down {
            down = peak;
            k_down = k;
        }
    }
    if up <= 0.0 || down <= 0.0 {
        return None;
    }
    // The square's diagonal is the segment between the two curves at the peak's u, along the
    // rotated v axis: back in (x, y) it joins opposite corners.
    let corners = |k: usize| {
        let (u, va, vb) = (us[k], vas[k], vas[k] - d[k]);
        (((va + u) * s, (va - u) * s), ((vb + u) * s, (vb - u) * s))
    };
    let (upper_lobe, lower_lobe) = (up * s, down * s);
    Some(NoiseMargin {
        snm: upper_lobe.min(lower_lobe),
        upper_lobe,
        lower_lobe,
        squares: [corners(k_up), corners(k_down)],
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// An ideal step inverter at V_DD = 1 has a margin of V_DD/2 (Seevinck et al. 1987: the
    /// square fills half the box).
    #[test]
    fn ideal_step_inverter() {
        let x: Vec<f64> = (0..=2000).map(|i| i as f64 / 2000.0).collect();
        let y: Vec<f64> = x
            .iter()
            .map(|&v| {
                if v < 0.5 {
                    1.0
                } else if v > 0.5 {
                    0.0
                } else {
                    0.5
                }
            })
            .collect();
        let m = butterfly(&x, &y, &x, &y).unwrap();
        assert!((m.snm - 0.5).abs() < 2e-3, "{m:?}");
        assert!((m.upper_lobe - m.lower_lobe).abs() < 1e-9);
        // Each square's corners are a side apart in x and in y.
        for ((x0, y0), (x1, y1)) in m.squares {
            assert!(((x1 - x0).abs() - m.upper_lobe).abs() < 1e-9, "{m:?}");
            assert!(((y1 - y0).abs() - m.upper_lobe).abs() < 1e-9);
        }
    }

    /// A curve that never crosses its mirror image has no lobes.
    #[test]
    fn a_buffer_like_pair_has_no_margin() {
        let x = [0.0, 0.5, 1.0];
        let y = [0.6, 0.5, 0.4];
        assert!(butterfly(&x, &y, &x, &y).is_none());
    }
}
