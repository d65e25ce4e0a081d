//! Fuzz target: any bytes, as a circuit file, must load or fail with diagnostics that render.
#![no_main]

use libfuzzer_sys::fuzz_target;
use lamina_netlist::{load_source, render, LoadOptions};

fuzz_target!(|data: &[u8]| {
    let text = String::from_utf8_lossy(data);
    if let Err(f) = load_source("fuzz.lam", &text, &LoadOptions::default()) {
        let _ = render(&f.sources, &f.diagnostics);
    }
});
