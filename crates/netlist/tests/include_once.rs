//! A file included by several others is read once: a process file shared by a circuit and a
//! file of spreads defines its cards once, while a cycle is still an error.

use lamina_netlist::{load_file, ErrorKind, LoadOptions};
use std::path::PathBuf;

fn dir(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("lamina-include-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

#[test]
fn a_shared_file_is_read_once_and_a_cycle_is_still_refused() {
    let d = dir("once");
    std::fs::write(
        d.join("process.lam"),
        "device nfet : square_nfet { k = 100 uA/V^2, threshold = 0.3 V }\n",
    )
    .unwrap();
    std::fs::write(
        d.join("circuit.lam"),
        "include \"process.lam\"\nvoltage_source v (pos = a, neg = ground) { dc = 1 V }\nnfet m (drain = a, gate = a, source = ground)\n",
    )
    .unwrap();
    std::fs::write(d.join("spreads.lam"), "include \"process.lam\"\n").unwrap();
    std::fs::write(
        d.join("top.lam"),
        "include \"circuit.lam\"\ninclude \"spreads.lam\"\ninclude \"process.lam\"\n",
    )
    .unwrap();
    let design = load_file(&d.join("top.lam"), &LoadOptions::default())
        .unwrap_or_else(|f| panic!("{:?}", f.diagnostics));
    assert_eq!(design.circuit.element_count(), 2);

    std::fs::write(d.join("x.lam"), "include \"y.lam\"\n").unwrap();
    std::fs::write(d.join("y.lam"), "include \"x.lam\"\n").unwrap();
    let kinds: Vec<ErrorKind> = match load_file(&d.join("x.lam"), &LoadOptions::default()) {
        Ok(_) => panic!("a cycle must be refused"),
        Err(f) => f.diagnostics.iter().map(|d| d.kind).collect(),
    };
    assert_eq!(kinds, vec![ErrorKind::IncludeCycle]);
    let _ = std::fs::remove_dir_all(d);
}
