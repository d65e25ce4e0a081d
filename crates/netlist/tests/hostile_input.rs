//! Hostile and extreme input never panics, never allocates without bound, and is either
//! accepted or refused with located diagnostics.
//!
//! * Every numeric parameter of every element kind, set (in its own unit) to extreme values:
//!   1e-300, 1e300, negative, zero, `NaN` spelled as text, and random magnitudes.
//! * A grammar-aware generator of near-valid files: statements built from the language's real
//!   constructs (parameters with units, device cards of both FET kinds, elements, cells, loops,
//!   includes of nothing, analyses), then mutated the way people mistype (a unit dropped or
//!   swapped, a name misspelt, a token deleted or doubled, a character inserted).
//!
//! The case count is `LAMINA_FUZZ_CASES` (default 1500, a few seconds in CI); the seeds are
//! 0, 1, 2, ... so a failure names its seed and reproduces exactly. A counting allocator
//! checks that no single load reaches [`PEAK_BYTES`].

use lamina_netlist::catalog::KINDS;
use lamina_netlist::{load_source, render, LoadOptions};
use std::alloc::{GlobalAlloc, Layout, System};
use std::sync::atomic::{AtomicUsize, Ordering};

/// The most memory one load may hold at once.
const PEAK_BYTES: usize = 512 << 20;

struct Counting;
static LIVE: AtomicUsize = AtomicUsize::new(0);
static PEAK: AtomicUsize = AtomicUsize::new(0);

// SAFETY: forwards to the system allocator unchanged; only counts bytes.
unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        let p = unsafe { System.alloc(layout) };
        if !p.is_null() {
            let now = LIVE.fetch_add(layout.size(), Ordering::Relaxed) + layout.size();
            PEAK.fetch_max(now, Ordering::Relaxed);
        }
        p
    }
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        unsafe { System.dealloc(ptr, layout) };
        LIVE.fetch_sub(layout.size(), Ordering::Relaxed);
    }
}

#[global_allocator]
static ALLOCATOR: Counting = Counting;

/// A small deterministic generator (splitmix64).
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^ (z >> 31)
    }
    fn below(&mut self, n: usize) -> usize {
        (self.next() % n.max(1) as u64) as usize
    }
    fn chance(&mut self, percent: usize) -> bool {
        self.below(100) < percent
    }
    fn pick<'a>(&mut self, items: &[&'a str]) -> &'a str {
        items[self.below(items.len())]
    }
}

/// Loads `text`; panics if the load panics (the test harness reports it), if a diagnostic is
/// not located in a file that was read, or if the load's peak memory passes the bound.
fn load_checked(text: &str, what: &str) -> bool {
    let base = LIVE.load(Ordering::Relaxed);
    PEAK.store(base, Ordering::Relaxed);
    let result = load_source("fuzz.lam", text, &LoadOptions::default());
    let peak = PEAK.load(Ordering::Relaxed).saturating_sub(base);
    assert!(
        peak < PEAK_BYTES,
        "{what}: the load held {peak} bytes at once\n{text}"
    );
    match result {
        Ok(_) => true,
        Err(f) => {
            assert!(
                !f.diagnostics.is_empty(),
                "{what}: refused without a reason"
            );
            if std::env::var_os("LAMINA_FUZZ_DEBUG").is_some() {
                eprintln!("{what}: {}", f.diagnostics[0].message);
            }
            for d in &f.diagnostics {
                assert!(d.span.file < f.sources.len(), "{what}: unlocated {d:?}");
                let len = f.sources.text(d.span.file).len();
                assert!(
                    d.span.start <= d.span.end && d.span.end <= len,
                    "{what}: span outside its file: {d:?}\n{text}"
                );
            }
            let _ = render(&f.sources, &f.diagnostics);
            false
        }
    }
}

fn cases() -> u64 {
    std::env::var("LAMINA_FUZZ_CASES")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(1500)
}

/// The unit a parameter's values are written in (from its kind's example value).
fn unit_of(dim: lamina_netlist::units::Dim) -> String {
    dim.example()
        .split_once(' ')
        .map_or(String::new(), |(_, u)| u.to_string())
}

#[test]
fn extreme_values_of_every_parameter_never_panic() {
    let extremes = [
        "1e-300", "1e300", "-1", "0", "NaN", "-1e300", "2.5", "1e-30", "4.9e-324",
    ];
    let mut rng = Rng(7);
    let mut loaded = 0;
    let mut refused = 0;
    for kind in KINDS {
        for spec in kind.params.iter().filter(|p| !p.text && !p.waveform) {
            for k in 0..extremes.len() + 4 {
                let number = if k < extremes.len() {
                    extremes[k].to_string()
                } else {
                    // A random magnitude over 1e-30 .. 1e30, either sign.
                    let e = rng.below(61) as i32 - 30;
                    let sign = if rng.chance(30) { "-" } else { "" };
                    format!("{sign}{}e{e}", 1 + rng.below(9))
                };
                let value = format!("{number} {}", unit_of(spec.dim));
                let text = match kind.name {
                    "sheet_fet" => format!(
                        "device d : sheet_fet {{ channel = MoS2, insulator = hBN, \
                         insulator_layers = 10, gate = Au, {} = {value} }}\n\
                         voltage_source v (pos = a, neg = ground) {{ dc = 1 V }}\n\
                         d m (drain = a, gate = a, source = ground)\n",
                        spec.name
                    ),
                    "square_nfet" | "square_pfet" => format!(
                        "voltage_source v (pos = a, neg = ground) {{ dc = 1 V }}\n\
                         {} m (drain = a, gate = a, source = ground) {{ k = 1 mA/V^2, \
                         threshold = 0.3 V, {} = {value} }}\n",
                        kind.name, spec.name
                    )
                    .replacen(&format!(", {} = {value}", spec.name), "", 0),
                    _ => {
                        let pins: Vec<String> = kind
                            .terminals
                            .iter()
                            .enumerate()
                            .map(|(i, t)| format!("{t} = n{i}"))
                            .collect();
                        format!(
                            "{} e ({}) {{ {} = {value} }}\n",
                            kind.name,
                            pins.join(", "),
                            spec.name
                        )
                    }
                };
                // The square-law kinds would see their own key twice for `k` and `threshold`.
                let text = if matches!(kind.name, "square_nfet" | "square_pfet")
                    && matches!(spec.name, "k" | "threshold")
                {
                    text.replacen(
                        &format!(
                            "{} = {}",
                            spec.name,
                            if spec.name == "k" {
                                "1 mA/V^2"
                            } else {
                                "0.3 V"
                            }
                        ),
                        &format!("{} = {value}", spec.name),
                        1,
                    )
                    .replacen(
                        &format!(", {} = {value} }}", spec.name),
                        " }",
                        1,
                    )
                } else {
                    text
                };
                if load_checked(&text, &format!("{} {} = {value}", kind.name, spec.name)) {
                    loaded += 1;
                } else {
                    refused += 1;
                }
            }
        }
    }
    // Both outcomes occur: the test would be empty if everything were refused.
    assert!(
        loaded > 50 && refused > 50,
        "{loaded} loaded, {refused} refused"
    );
}

const NODES: &[&str] = &["a", "b", "out", "vdd", "ground", "mid", "n[1]", "a", "b"];
const UNITS: &[&str] = &[
    "V",
    "mV",
    "A",
    "uA",
    "nm",
    "um",
    "fF",
    "pF",
    "kOhm",
    "ps",
    "ns",
    "GHz",
    "K",
    "eV",
    "cm^2/(V s)",
    "/cm^2",
    "Ohm um",
    "uA/V^2",
    "",
    "Vs",
    "fFF",
    "m",
];

/// A value in `unit`, mostly valid: now and then a wrong or missing unit, an extreme or a
/// negative number.
fn quantity(r: &mut Rng, unit: &str) -> String {
    let unit = if r.chance(4) { r.pick(UNITS) } else { unit };
    let n = match r.below(40) {
        0 => "0".to_string(),
        1 => format!("1e{}", r.below(700) as i32 - 350),
        2 => format!("-{}", 1 + r.below(50)),
        _ => format!("{}.{}", 1 + r.below(20), r.below(100)),
    };
    format!("{n} {unit}").trim_end().to_string()
}

fn statement(r: &mut Rng, params: &mut Vec<String>, cells: &mut Vec<String>) -> String {
    match r.below(11) {
        0 => {
            let name = format!("p{}", params.len());
            let name = if r.chance(3) { "p0".to_string() } else { name };
            let e = match (r.below(4), params.iter().rev().find(|p| !p.is_empty())) {
                (0, Some(p)) => format!("{p} * 2"),
                (1, Some(p)) => format!("sqrt({p} * {p}) + {}", quantity(r, "V")),
                _ => {
                    let unit = r.pick(&["V", "nm", "fF", "", "K"]);
                    quantity(r, unit)
                }
            };
            params.push(name.clone());
            format!("param {name} = {e}")
        }
        1 => format!(
            "device nf{} : square_nfet {{ k = {}, threshold = {} }}",
            {
                params.push(String::new());
                params.len()
            },
            quantity(r, "uA/V^2"),
            quantity(r, "V")
        ),
        2 => {
            let mut s = format!(
                "device sf{} : sheet_fet {{ channel = {}, insulator = {}, gate = {}",
                {
                    params.push(String::new());
                    params.len()
                },
                r.pick(&["MoS2", "WSe2", "MoS2", "WS2", "MoSe2", "MoS2", "WSe2", "mos2"]),
                r.pick(&["hBN", "hBN", "hBN", "hbn"]),
                r.pick(&["Au", "graphene", "Ti", "Au", "Pd", "Pt", "Ni", "Graphene"])
            );
            s.push_str(&format!(", insulator_layers = {}", r.below(40)));
            for (key, unit) in [
                ("insulator_thickness", "nm"),
                ("temperature", "K"),
                ("electron_mobility", "cm^2/(V s)"),
                ("length", "nm"),
                ("width", "um"),
                ("donor_density", "/cm^2"),
                ("saturation_velocity", "cm/s"),
                ("gate_half_gap", "eV"),
                ("source_resistance", "Ohm um"),
            ] {
                if r.chance(if key == "insulator_thickness" || key == "gate_half_gap" {
                    3
                } else {
                    15
                }) {
                    s.push_str(&format!(", {key} = {}", quantity(r, unit)));
                }
            }
            s.push_str(" }");
            s
        }
        3 => format!(
            "resistor r{} (a = {}, b = {}) {{ resistance = {} }}",
            r.below(1000),
            r.pick(NODES),
            r.pick(NODES),
            quantity(r, "kOhm")
        ),
        4 => format!(
            "capacitor c{} (a = {}, b = ground) {{ capacitance = {} }}",
            r.below(1000),
            r.pick(NODES),
            quantity(r, "fF")
        ),
        5 => format!(
            "voltage_source v{} (pos = {}, neg = ground) {{ {} }}",
            1 + r.below(1000),
            r.pick(NODES),
            if r.chance(50) {
                format!("dc = {}", quantity(r, "V"))
            } else {
                format!(
                    "wave = pulse(high = {}, rise = {}, fall = 10 ps, width = {})",
                    quantity(r, "V"),
                    quantity(r, "ps"),
                    quantity(r, "ns")
                )
            }
        ),
        6 => format!(
            "{} m{} (drain = {}, gate = {}, source = {})",
            r.pick(&["nf0", "nf0", "sf0", "nf0", "sf0", "nf0", "nf1", "sf1"]),
            r.below(1000),
            r.pick(NODES),
            r.pick(NODES),
            r.pick(NODES)
        ),
        7 => {
            let name = format!("cell{}", cells.len());
            cells.push(name.clone());
            format!(
                "cell {name}(x, y) {{\n    param load = {}\n    resistor r (a = x, b = y) {{ resistance = 1 kOhm }}\n    capacitor c (a = y, b = ground) {{ capacitance = load }}\n}}",
                quantity(r, "fF")
            )
        }
        8 => match cells.last() {
            Some(c) => format!(
                "for i in 0..{} {{ {c} u[i] (x = {}, y = out[i]) }}",
                r.below(30),
                r.pick(NODES)
            ),
            None => "analysis operating_point".to_string(),
        },
        9 => format!(
            "for i in {}..{} {{ resistor q[i] (a = n[i], b = n[i + 1]) {{ resistance = {} }} }}",
            r.below(3),
            r.below(12),
            quantity(r, "Ohm")
        ),
        _ => match r.below(4) {
            0 => format!(
                "analysis transfer {{ source = {}, output = {}, from = {}, to = {}, step = {} }}",
                r.pick(&["v0", "v0", "v0", "nothing"]),
                r.pick(NODES),
                quantity(r, "V"),
                quantity(r, "V").replace("0.", "20."),
                quantity(r, "mV")
            ),
            1 => format!(
                "analysis delay {{ from = {}, to = {}, stop = {} }}",
                r.pick(&["vdd", "a"]),
                r.pick(&["b", "out", "mid"]),
                quantity(r, "ns")
            ),
            2 => format!(
                "analysis ring {{ nodes = out, stages = {}, supply = {} }}",
                r.below(30),
                r.pick(NODES)
            ),
            _ => "analysis operating_point".to_string(),
        },
    }
}

/// Mistakes people make while typing.
fn mutate(r: &mut Rng, line: &str) -> String {
    let mut s = line.to_string();
    match r.below(6) {
        0 if !s.is_empty() => {
            let at = r.below(s.len());
            if s.is_char_boundary(at) {
                s.insert(
                    at,
                    *[b'(', b'}', b'=', b'"', b'#', b'$', b',', b'\n']
                        .get(r.below(8))
                        .unwrap_or(&b'x') as char,
                );
            }
        }
        1 => {
            let words: Vec<&str> = s.split(' ').collect();
            let k = r.below(words.len());
            s = words
                .iter()
                .enumerate()
                .filter(|(i, _)| *i != k)
                .map(|(_, w)| *w)
                .collect::<Vec<_>>()
                .join(" ");
        }
        2 => s = s.replacen(" V", "", 1).replacen(" nm", " V", 1),
        3 => {
            s = s
                .replacen("resistor", "resistr", 1)
                .replacen("out", "otu", 1)
        }
        4 => s = format!("{s}\n{s}"),
        _ => s = s.replacen(" = ", " ", 1),
    }
    s
}

fn near_valid(seed: u64) -> String {
    let mut r = Rng(seed);
    let mut params = Vec::new();
    let mut cells = Vec::new();
    let mut lines = vec![
        "voltage_source v0 (pos = vdd, neg = ground) { dc = 1 V }".to_string(),
        "device nf0 : square_nfet { k = 100 uA/V^2, threshold = 0.3 V }".to_string(),
        "device sf0 : sheet_fet { channel = MoS2, insulator = hBN, insulator_layers = 10, gate = Au }"
            .to_string(),
    ];
    for _ in 0..3 + r.below(12) {
        let line = statement(&mut r, &mut params, &mut cells);
        lines.push(if r.chance(4) {
            mutate(&mut r, &line)
        } else {
            line
        });
    }
    lines.join("\n") + "\n"
}

#[test]
fn near_valid_files_are_accepted_or_refused_with_located_diagnostics() {
    let n = cases();
    let mut loaded = 0u64;
    for seed in 0..n {
        if load_checked(&near_valid(seed), &format!("seed {seed}")) {
            loaded += 1;
        }
    }
    // The generator is near-valid: a good share of its files load.
    assert!(
        loaded * 10 >= n,
        "only {loaded} of {n} generated files loaded"
    );
}
