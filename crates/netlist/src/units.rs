//! Physical dimensions and unit symbols.
//!
//! A dimension is a vector of integer exponents over (metre, second, volt, ampere, kelvin),
//! the base that suits circuits: a farad is `A s / V`, an ohm `V / A`, an electron-volt an
//! energy `V A s` scaled by the elementary charge. Unit symbols take one SI prefix
//! (`f p n u µ m c k M G T`); `c` is allowed only on metres (`cm`).

use std::fmt;

/// Integer exponents of (m, s, V, A, K).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Default)]
pub struct Dim(pub [i8; 5]);

impl Dim {
    /// A pure number.
    pub const NONE: Dim = Dim([0; 5]);
    /// Metre.
    pub const LENGTH: Dim = Dim([1, 0, 0, 0, 0]);
    /// Second.
    pub const TIME: Dim = Dim([0, 1, 0, 0, 0]);
    /// Volt.
    pub const VOLTAGE: Dim = Dim([0, 0, 1, 0, 0]);
    /// Ampere.
    pub const CURRENT: Dim = Dim([0, 0, 0, 1, 0]);
    /// Kelvin.
    pub const TEMPERATURE: Dim = Dim([0, 0, 0, 0, 1]);
    /// Ohm.
    pub const RESISTANCE: Dim = Dim([0, 0, 1, -1, 0]);
    /// Siemens.
    pub const CONDUCTANCE: Dim = Dim([0, 0, -1, 1, 0]);
    /// Farad.
    pub const CAPACITANCE: Dim = Dim([0, 1, -1, 1, 0]);
    /// Henry.
    pub const INDUCTANCE: Dim = Dim([0, 1, 1, -1, 0]);
    /// Hertz.
    pub const FREQUENCY: Dim = Dim([0, -1, 0, 0, 0]);
    /// A/V² (transconductance parameter of a square-law device).
    pub const TRANSCONDUCTANCE_PARAMETER: Dim = Dim([0, 0, -2, 1, 0]);
    /// 1/V.
    pub const PER_VOLT: Dim = Dim([0, 0, -1, 0, 0]);

    /// Product of two dimensions.
    pub fn times(self, o: Dim) -> Dim {
        let mut d = [0i8; 5];
        for (i, v) in d.iter_mut().enumerate() {
            *v = self.0[i].saturating_add(o.0[i]);
        }
        Dim(d)
    }

    /// Quotient of two dimensions.
    pub fn per(self, o: Dim) -> Dim {
        self.times(o.pow(-1))
    }

    /// Integer power.
    pub fn pow(self, k: i32) -> Dim {
        let mut d = [0i8; 5];
        for (i, v) in d.iter_mut().enumerate() {
            *v = (self.0[i] as i32 * k).clamp(-100, 100) as i8;
        }
        Dim(d)
    }

    /// Square root, if every exponent is even.
    pub fn sqrt(self) -> Option<Dim> {
        if self.0.iter().all(|e| e % 2 == 0) {
            let mut d = self.0;
            for v in &mut d {
                *v /= 2;
            }
            Some(Dim(d))
        } else {
            None
        }
    }

    /// Energy (J; eV in circuit files).
    pub const ENERGY: Dim = Dim([0, 1, 1, 1, 0]);
    /// Charge (C).
    pub const CHARGE: Dim = Dim([0, 1, 0, 1, 0]);
    /// Power (W).
    pub const POWER: Dim = Dim([0, 0, 1, 1, 0]);
    /// Area (m²).
    pub const AREA: Dim = Dim([2, 0, 0, 0, 0]);
    /// Density per area (1/m²).
    pub const PER_AREA: Dim = Dim([-2, 0, 0, 0, 0]);
    /// Density per energy and area (1/(J m²)).
    pub const PER_ENERGY_AREA: Dim = Dim([-2, -1, -1, -1, 0]);
    /// Mobility (m²/(V s)).
    pub const MOBILITY: Dim = Dim([2, -1, -1, 0, 0]);
    /// Velocity (m/s).
    pub const VELOCITY: Dim = Dim([1, -1, 0, 0, 0]);
    /// Resistance times width (Ohm m), as contact resistances are quoted.
    pub const RESISTANCE_WIDTH: Dim = Dim([1, 0, 1, -1, 0]);
    /// Capacitance per width (F/m).
    pub const CAPACITANCE_PER_WIDTH: Dim = Dim([-1, 1, -1, 1, 0]);
    /// Capacitance per area (F/m²).
    pub const CAPACITANCE_PER_AREA: Dim = Dim([-2, 1, -1, 1, 0]);
    /// Electric field (V/m).
    pub const FIELD: Dim = Dim([-1, 0, 1, 0, 0]);
    /// Energy per area (J/m², the same as N/m): a 2D elastic modulus.
    pub const ENERGY_PER_AREA: Dim = Dim([-2, 1, 1, 1, 0]);

    /// A value written with a unit of this dimension, for help messages.
    pub fn example(self) -> String {
        match NAMED.iter().find(|n| n.0 == self) {
            Some(n) => n.3.to_string(),
            None => format!("1 {self}"),
        }
    }

    /// A plain-words name with the unit, for messages: "a length (m)".
    pub fn describe(self) -> String {
        match NAMED.iter().find(|n| n.0 == self) {
            Some(n) if self == Dim::NONE => n.1.to_string(),
            Some(n) => format!("{} ({})", n.1, n.2),
            None => format!("a quantity in {self}"),
        }
    }

    /// The unit in the trade's words ("Ohm m", "cm^2/(V s)"), for tables and messages.
    pub fn unit(self) -> String {
        match NAMED.iter().find(|n| n.0 == self) {
            Some(n) => n.2.to_string(),
            None => self.to_string(),
        }
    }
}

/// Dimensions with a name, the unit the trade writes them in, and an example value.
const NAMED: &[(Dim, &str, &str, &str)] = &[
    (Dim::NONE, "a pure number", "1", "2"),
    (Dim::LENGTH, "a length", "m", "50 nm"),
    (Dim::TIME, "a time", "s", "10 ps"),
    (Dim::VOLTAGE, "a voltage", "V", "0.8 V"),
    (Dim::CURRENT, "a current", "A", "10 uA"),
    (Dim::TEMPERATURE, "a temperature", "K", "300 K"),
    (Dim::RESISTANCE, "a resistance", "Ohm", "10 kOhm"),
    (Dim::CONDUCTANCE, "a conductance", "S", "1 mS"),
    (Dim::CAPACITANCE, "a capacitance", "F", "1 fF"),
    (Dim::INDUCTANCE, "an inductance", "H", "1 nH"),
    (Dim::FREQUENCY, "a frequency", "Hz", "1 GHz"),
    (
        Dim::TRANSCONDUCTANCE_PARAMETER,
        "a transconductance parameter",
        "A/V^2",
        "100 uA/V^2",
    ),
    (Dim::PER_VOLT, "an inverse voltage", "1/V", "0.1 /V"),
    (Dim::ENERGY, "an energy", "J, or eV", "0.9 eV"),
    (Dim::CHARGE, "a charge", "C", "1 fC"),
    (Dim::POWER, "a power", "W", "1 uW"),
    (Dim::AREA, "an area", "m^2", "1 um^2"),
    (Dim::PER_AREA, "a density per area", "1/m^2", "1e12 /cm^2"),
    (
        Dim::PER_ENERGY_AREA,
        "a density per energy and area",
        "1/(J m^2), or 1/(eV cm^2)",
        "1e12 /(eV cm^2)",
    ),
    (Dim::MOBILITY, "a mobility", "m^2/(V s)", "40 cm^2/(V s)"),
    (Dim::VELOCITY, "a velocity", "m/s", "3e6 cm/s"),
    (
        Dim::RESISTANCE_WIDTH,
        "a resistance times width",
        "Ohm m",
        "300 Ohm um",
    ),
    (
        Dim::CAPACITANCE_PER_WIDTH,
        "a capacitance per width",
        "F/m",
        "0.1 fF/um",
    ),
    (
        Dim::CAPACITANCE_PER_AREA,
        "a capacitance per area",
        "F/m^2",
        "1 uF/cm^2",
    ),
    (Dim::FIELD, "an electric field", "V/m", "1 MV/cm"),
    (
        Dim::ENERGY_PER_AREA,
        "an energy per area (a 2D elastic modulus)",
        "J/m^2, the same as N/m",
        "100 J/m^2",
    ),
];

impl fmt::Display for Dim {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let names = ["m", "s", "V", "A", "K"];
        let mut parts = Vec::new();
        for (i, &e) in self.0.iter().enumerate() {
            match e {
                0 => {}
                1 => parts.push(names[i].to_string()),
                e => parts.push(format!("{}^{e}", names[i])),
            }
        }
        if parts.is_empty() {
            f.write_str("1")
        } else {
            f.write_str(&parts.join(" "))
        }
    }
}

/// Elementary charge in coulombs (CODATA 2018, exact by the 2019 SI definition).
const ELEMENTARY_CHARGE: f64 = 1.602_176_634e-19;

const BASES: &[(&str, f64, Dim)] = &[
    ("m", 1.0, Dim::LENGTH),
    ("s", 1.0, Dim::TIME),
    ("V", 1.0, Dim::VOLTAGE),
    ("A", 1.0, Dim::CURRENT),
    ("K", 1.0, Dim::TEMPERATURE),
    ("F", 1.0, Dim::CAPACITANCE),
    ("Ohm", 1.0, Dim::RESISTANCE),
    ("ohm", 1.0, Dim::RESISTANCE),
    ("Ω", 1.0, Dim::RESISTANCE),
    ("S", 1.0, Dim::CONDUCTANCE),
    ("H", 1.0, Dim::INDUCTANCE),
    ("C", 1.0, Dim([0, 1, 0, 1, 0])),
    ("J", 1.0, Dim([0, 1, 1, 1, 0])),
    ("W", 1.0, Dim([0, 0, 1, 1, 0])),
    ("Hz", 1.0, Dim::FREQUENCY),
    ("eV", ELEMENTARY_CHARGE, Dim([0, 1, 1, 1, 0])),
];

const PREFIXES: &[(&str, f64)] = &[
    ("f", 1e-15),
    ("p", 1e-12),
    ("n", 1e-9),
    ("u", 1e-6),
    ("µ", 1e-6),
    ("m", 1e-3),
    ("c", 1e-2),
    ("k", 1e3),
    ("M", 1e6),
    ("G", 1e9),
    ("T", 1e12),
];

/// The scale to SI and the dimension of a unit symbol such as `fF`, `cm` or `kOhm`.
pub fn unit_atom(symbol: &str) -> Option<(f64, Dim)> {
    if let Some(&(_, scale, dim)) = BASES.iter().find(|(s, _, _)| *s == symbol) {
        return Some((scale, dim));
    }
    for &(p, factor) in PREFIXES {
        if let Some(rest) = symbol.strip_prefix(p) {
            if p == "c" && rest != "m" {
                continue;
            }
            if let Some(&(_, scale, dim)) = BASES.iter().find(|(s, _, _)| *s == rest) {
                return Some((factor * scale, dim));
            }
        }
    }
    None
}

/// A value in engineering notation with an SI prefix on its unit, four significant digits:
/// `engineering(6e-10, "s")` is `600 ps`, `engineering(0.6, "V")` is `600 mV`. Without a
/// unit, or for zero, the plain number.
pub fn engineering(v: f64, unit: &str) -> String {
    const PREFIXES: [&str; 13] = [
        "y", "z", "a", "f", "p", "n", "µ", "m", "", "k", "M", "G", "T",
    ];
    // Four significant digits.
    let short = |x: f64| {
        let digits = if x == 0.0 {
            0
        } else {
            (3 - x.abs().log10().floor() as i32).clamp(0, 6) as usize
        };
        let s = format!("{x:.digits$}");
        let s = if s.contains('.') {
            s.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            s
        };
        if s == "-0" {
            "0".to_string()
        } else {
            s
        }
    };
    if unit.is_empty() || v == 0.0 || !v.is_finite() {
        let plain = if v != 0.0 && (v.abs() < 1e-3 || v.abs() >= 1e5) {
            format!("{v:.3e}")
        } else {
            short(v)
        };
        return if unit.is_empty() {
            plain
        } else {
            format!("{plain} {unit}")
        };
    }
    if v.abs() < 1e-24 || v.abs() >= 1e15 {
        return format!("{v:.3e} {unit}");
    }
    let e = ((v.abs().log10() / 3.0).floor() as i32).clamp(-8, 4);
    let m = v / 10f64.powi(3 * e);
    // Rounding can carry a mantissa to 1000: move to the next prefix.
    let (m, e) = if (m.abs() * 1e4).round() / 1e4 >= 1000.0 && e < 4 {
        (m / 1000.0, e + 1)
    } else {
        (m, e)
    };
    format!("{} {}{unit}", short(m), PREFIXES[(e + 8) as usize])
}

/// Every unit symbol without prefix, for "did you mean" suggestions.
pub fn base_symbols() -> impl Iterator<Item = &'static str> {
    BASES.iter().map(|b| b.0)
}

/// Every unit symbol with and without prefix (`fF`, `kOhm`, `cm`), for suggestions.
pub fn all_symbols() -> Vec<String> {
    let mut v: Vec<String> = BASES.iter().map(|b| b.0.to_string()).collect();
    for (p, _) in PREFIXES {
        for (b, _, _) in BASES {
            if *p != "c" || *b == "m" {
                v.push(format!("{p}{b}"));
            }
        }
    }
    v
}

/// If `word` is two or more unit symbols run together (`Vs`, `Ohmm`), the symbols.
pub fn run_together(word: &str) -> Option<Vec<&str>> {
    fn go<'a>(w: &'a str, out: &mut Vec<&'a str>) -> bool {
        if w.is_empty() {
            return out.len() >= 2;
        }
        for end in (1..=w.len()).rev() {
            if !w.is_char_boundary(end) {
                continue;
            }
            if unit_atom(&w[..end]).is_some() {
                out.push(&w[..end]);
                if go(&w[end..], out) {
                    return true;
                }
                out.pop();
            }
        }
        false
    }
    let mut out = Vec::new();
    go(word, &mut out).then_some(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn prefixed_units() {
        assert_eq!(unit_atom("fF"), Some((1e-15, Dim::CAPACITANCE)));
        assert_eq!(unit_atom("cm"), Some((1e-2, Dim::LENGTH)));
        assert_eq!(unit_atom("kOhm"), Some((1e3, Dim::RESISTANCE)));
        assert_eq!(unit_atom("m"), Some((1.0, Dim::LENGTH)));
        assert_eq!(unit_atom("ms"), Some((1e-3, Dim::TIME)));
        assert!(unit_atom("cV").is_none());
        assert!(unit_atom("out").is_none());
        assert_eq!(run_together("Vs"), Some(vec!["V", "s"]));
        assert_eq!(run_together("V"), None);
        assert!(all_symbols().iter().any(|s| s == "fF"));
        let (s, d) = unit_atom("meV").unwrap();
        assert!((s - 1.602176634e-22).abs() < 1e-35);
        assert_eq!(d, Dim([0, 1, 1, 1, 0]));
    }
}

#[cfg(test)]
mod engineering_tests {
    use super::engineering;

    #[test]
    fn prefixes_follow_the_value() {
        assert_eq!(engineering(6e-10, "s"), "600 ps");
        assert_eq!(engineering(0.6, "V"), "600 mV");
        assert_eq!(engineering(1.2, "V"), "1.2 V");
        assert_eq!(engineering(7.36e8, "Hz"), "736 MHz");
        assert_eq!(engineering(-3.3e-5, "A"), "-33 µA");
        assert_eq!(engineering(0.0, "V"), "0 V");
        assert_eq!(engineering(7.0, ""), "7");
        assert_eq!(engineering(999.99996, "V"), "1 kV");
    }
}

/// The dimension a figure key's unit suffix names, by the convention of every report's keys:
/// `_hz` frequency, `_s` time, `_v` voltage, `_w` power, `_j` energy, `_a` current, `_f`
/// capacitance, `_siemens` conductance, `_ohm` resistance; a pure number otherwise
/// (`gain_max`).
pub fn figure_dim(key: &str) -> Dim {
    figure_suffix(key).map_or(Dim::NONE, |(_, d)| d)
}

/// The unit suffix of a figure key and the dimension it names (see [`figure_dim`]), or `None`
/// for a pure number.
pub fn figure_suffix(key: &str) -> Option<(&'static str, Dim)> {
    const SUFFIXES: &[(&str, Dim)] = &[
        ("_hz", Dim::FREQUENCY),
        ("_siemens", Dim::CONDUCTANCE),
        ("_s", Dim::TIME),
        ("_v", Dim::VOLTAGE),
        ("_w", Dim::POWER),
        ("_j", Dim::ENERGY),
        ("_a", Dim::CURRENT),
        ("_f", Dim::CAPACITANCE),
        ("_ohm", Dim::RESISTANCE),
    ];
    SUFFIXES.iter().find(|(s, _)| key.ends_with(s)).copied()
}
