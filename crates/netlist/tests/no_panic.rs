//! No input makes the loader panic: random text, and truncated or byte-flipped versions of a
//! valid file, must all end in a design or in diagnostics (which must also render).

use lamina_netlist::{load_source, render, LoadOptions};
use proptest::prelude::*;

const GOOD: &str = r#"# a small valid file
param vdd = 1 V
param n = 3
device nfet : square_nfet { k = 100 uA/V^2, threshold = 0.3 V }
cell inv(input, output, supply) {
    param load = 1 fF
    nfet pd (drain = output, gate = input, source = ground)
    square_pfet pu (drain = output, gate = input, source = supply) { k = 100 uA/V^2, threshold = -0.3 V }
    capacitor c (a = output, b = ground) { capacitance = load }
}
voltage_source s (pos = vdd, neg = ground) { dc = vdd }
voltage_source clk (pos = a, neg = ground) { wave = pulse(high = vdd, rise = 1 ps, fall = 1 ps, width = 1 ns) }
for i in 0..n { inv x[i] (input = out[(i + n - 1) % n], output = out[i], supply = vdd) }
analysis ring { nodes = out, stages = n, supply = vdd }
"#;

fn check(text: &str) {
    match load_source("fuzz.lam", text, &LoadOptions::default()) {
        Ok(_) => {}
        Err(f) => {
            let _ = render(&f.sources, &f.diagnostics);
        }
    }
}

#[test]
fn the_seed_file_is_valid() {
    assert!(load_source("fuzz.lam", GOOD, &LoadOptions::default()).is_ok());
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 2000, ..ProptestConfig::default() })]

    #[test]
    fn random_text_does_not_panic(s in "[ -~\n\tµΩ]{0,200}") {
        check(&s);
    }

    #[test]
    fn random_bytes_do_not_panic(b in proptest::collection::vec(any::<u8>(), 0..300)) {
        check(&String::from_utf8_lossy(&b));
    }

    #[test]
    fn truncated_files_do_not_panic(cut in 0usize..GOOD.len()) {
        let mut end = cut;
        while !GOOD.is_char_boundary(end) { end -= 1; }
        check(&GOOD[..end]);
    }

    #[test]
    fn byte_flips_do_not_panic(pos in 0usize..GOOD.len(), byte in any::<u8>(), pos2 in 0usize..GOOD.len()) {
        let mut b = GOOD.as_bytes().to_vec();
        b[pos] = byte;
        b.swap(pos, pos2);
        check(&String::from_utf8_lossy(&b));
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 500, ..ProptestConfig::default() })]

    /// The syntax tree is lossless: tokens plus the trivia between them give back the input.
    #[test]
    fn syntax_tree_reproduces_its_source(b in proptest::collection::vec(any::<u8>(), 0..300), cut in 0usize..GOOD.len()) {
        for text in [String::from_utf8_lossy(&b).into_owned(), GOOD[..GOOD.floor_char_boundary(cut)].to_string()] {
            let mut d = Vec::new();
            let tree = lamina_netlist::parser::SyntaxTree::parse(0, &text, &mut d);
            prop_assert_eq!(tree.to_source(&text), text);
        }
    }
}
