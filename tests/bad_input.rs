//! The bad-input catalogue: every malformed network gives exit status 2, names
//! file:line:column, says what is wrong, and never panics.

mod support;

use std::path::PathBuf;
use std::process::Command;

struct Case {
    name: &'static str,
    text: Vec<u8>,
    line: u32,
    col: u32,
    says: &'static str,
}

fn case(name: &'static str, text: &str, line: u32, col: u32, says: &'static str) -> Case {
    Case {
        name,
        text: text.as_bytes().to_vec(),
        line,
        col,
        says,
    }
}

fn catalogue() -> Vec<Case> {
    let deep = format!(
        "species A = 1\nstep s A -> 0 @ law {}A{}\n",
        "(".repeat(100),
        ")".repeat(100)
    );
    let huge = format!(
        "species A = 1\nstep s A -> 0 @ 1 {}\n",
        "+".repeat(10_000_000)
    );
    let long_name = format!("species {} = 1\n", "x".repeat(5_000_000));
    // Nesting that no walk of the compiler may follow down the stack.
    let law = |body: String| format!("species A = 1\nstep s A -> 0 @ law A * {body}\n");
    let signs = law(format!("{}1", "-".repeat(10_000)));
    let powers = law(format!("{}1", "1 ^ ".repeat(10_000)));
    let calls = law(format!("{}0{}", "exp(".repeat(500), ")".repeat(500)));
    let parens = law(format!("{}1{}", "(".repeat(500), ")".repeat(500)));
    let mut v = vec![
        case("unknown species", "species A = 1\nstep s A -> Q @ 1\n", 2, 13, "unknown species `Q`"),
        case("duplicate species", "species A = 1\nspecies A = 2\n", 2, 9, "declared twice"),
        case("species named time", "species A = 1\nspecies time = 2\n", 2, 9, "`time` cannot name a species"),
        case("species and param share a name", "species A = 1\nparam A = 2\n", 2, 7, "declared twice"),
        case("duplicate label", "species A = 1\nstep s A -> 0 @ 1\nstep s A -> 0 @ 2\n", 3, 6, "used twice"),
        case("label clashes with a reverse", "species A = 1\nspecies B = 0\nstep s A <-> B @ 1, 1\nstep s_rev A -> B @ 1\n", 4, 6, "`s_rev` is used twice"),
        case("order 4", "species A = 10\nstep s 4 A -> 0 @ 1\n", 2, 8, "order 4"),
        case("order 4 after merging repeats", "species A = 10\nspecies B = 1\nstep s 2 A + B + A -> 0 @ 1\n", 3, 8, "order 4"),
        case("second-order constant in 1/s", "volume 1 fL\nspecies A = 1\nspecies B = 1\nstep s A + B -> 0 @ 2 /s\n", 4, 21, "needs dimension 1/(concentration·time)"),
        case("first-order constant in /M/s", "volume 1 fL\nspecies A = 1\nstep s A -> 0 @ 1e6 /M/s\n", 3, 17, "needs dimension 1/time"),
        case("zero-order constant without concentration", "volume 1 fL\nspecies A = 1\nstep s 0 -> A @ 3 /M\n", 3, 17, "needs dimension concentration/time"),
        case("negative constant", "species A = 1\nstep s A -> 0 @ -1\n", 2, 17, "at least 0"),
        case("negative param as a constant", "species A = 1\nparam k = -2 /s\nstep s A -> 0 @ k\n", 3, 17, "at least 0"),
        case("NaN spelled out", "param k = nan\n", 1, 11, "expected a number"),
        case("NaN from a law", "species A = 1\nstep s A -> 0 @ law (0 / 0) * A\n", 2, 22, "not a finite number"),
        case("infinite constant", "param k = 1e999\n", 1, 11, "finite"),
        case("concentration without a volume", "species A = 3 nM\n", 1, 13, "no volume"),
        case("count overflow", "species A = 1e18\n", 1, 13, "more than copyloop can count"),
        case("count overflow from a concentration", "volume 1 L\nspecies A = 1 M\n", 2, 13, "more than copyloop can count"),
        case("fractional molecules", "species A = 2.5\n", 1, 13, "not a whole number"),
        case("negative amount", "species A = -3\n", 1, 13, "at least 0"),
        case("unknown unit", "volume 1 fL\nspecies A = 3 nm\n", 2, 15, "unknown unit `nm`"),
        case("unknown unit after a slash", "species A = 1\nstep s A -> 0 @ 2 /sec\n", 2, 20, "unknown unit `sec`"),
        case("volume in a concentration unit", "volume 1 nM\n", 1, 8, "volume unit"),
        case("volume twice", "volume 1 fL\nvolume 2 fL\n", 2, 8, "set twice"),
        case("unbalanced parentheses in a law", "species A = 1\nstep s A -> 0 @ law (A * 2\n", 2, 27, "expected `)`"),
        case("closing parenthesis without opening", "species A = 1\nstep s A -> 0 @ law A * 2)\n", 2, 26, "found `)`"),
        case("missing @", "species A = 1\nstep s A -> 0 1\n", 2, 15, "expected `@`"),
        case("missing arrow", "species A = 1\nspecies B = 1\nstep s A B @ 1\n", 3, 10, "expected `->` or `<->`"),
        case("missing reverse rate", "species A = 1\nspecies B = 0\nstep s A <-> B @ 1\n", 3, 19, "reverse rate"),
        case("two rates on a one-way step", "species A = 1\nstep s A -> 0 @ 1, 2\n", 2, 18, "one-way"),
        case("unknown statement", "spec A = 1\n", 1, 1, "expected `volume`, `compartment`, `species`"),
        case("missing equals sign", "species A 1\n", 1, 11, "expected `=`"),
        case("bad coefficient", "species A = 1\nstep s 0.5 A -> 0 @ 1\n", 2, 8, "not a valid coefficient"),
        case("half-life on a second-order step", "species A = 1\nspecies B = 1\nstep s A + B -> 0 @ half-life 3 s\n", 3, 21, "first-order"),
        case("half-life that is not a time", "volume 1 fL\nspecies A = 1\nstep s A -> 0 @ half-life 3 nM\n", 3, 27, "positive time"),
        case("law with the wrong dimension", "volume 1 fL\nspecies A = 1\nstep s 0 -> A @ law 2 * A\n", 3, 21, "has dimension concentration"),
        case("law with an unknown name", "species A = 1\nstep s 0 -> A @ law k * A\n", 2, 21, "unknown name `k`"),
        case("law adding unlike dimensions", "volume 1 fL\nspecies A = 1\nparam k = 1 /s\nstep s 0 -> A @ law A + k\n", 4, 21, "cannot add"),
        case("unknown function", "species A = 1\nstep s 0 -> A @ law sqr(A)\n", 2, 21, "unknown function `sqr`"),
        case("kd with the wrong dimension", "volume 1 fL\nspecies A = 1\nspecies B = 1\nspecies C = 0\nstep s A + B <-> C @ 1e6 /M/s, kd 3 /s\n", 5, 35, "should have dimension concentration"),
        case("kd on a forward rate", "species A = 1\nstep s A -> 0 @ kd 3\n", 2, 17, "`kd` can only"),
        case("param used as a species", "param k = 1\nstep s k -> 0 @ 1\n", 2, 8, "is a param, not a species"),
        case("species used as a rate", "species A = 1\nstep s A -> 0 @ A\n", 2, 17, "is a species"),
        case("unknown param", "species A = 1\nstep s A -> 0 @ kx\n", 2, 17, "unknown param `kx`"),
        case("keyword as a name", "species law = 1\n", 1, 9, "keyword"),
        case("empty file", "", 1, 1, "no statements"),
        case("only comments", "# nothing here\n\n   \n", 1, 1, "no statements"),
        case("control character", "species A = 1\u{7}\n", 1, 14, "control character"),
        case("stray less-than", "species A = 1\nstep s A <- B @ 1\n", 2, 10, "`<->`"),
        case("expression nested too deeply", &deep, 2, 0, "nested more than 64 levels deep"),
        case("10,000 signs in a row", &signs, 2, 0, "nested more than 64 levels deep"),
        case("10,000 powers in a row", &powers, 2, 0, "nested more than 64 levels deep"),
        case("calls nested 500 deep", &calls, 2, 0, "nested more than 64 levels deep"),
        case("parentheses nested 500 deep", &parens, 2, 0, "nested more than 64 levels deep"),
        case("kd in concentration without a volume", "species A = 10\nspecies B = 10\nspecies C = 0\nstep bind A + B <-> C @ 0.01, kd 5 nM\n", 4, 34, "no volume to turn them into molecules"),
        case("law constant in concentration without a volume", "species A = 10\nparam K = 3 nM\nstep s 0 -> A @ law 1 molecules/s * sat(A, K)\n", 3, 41, "the network has no volume, so species are counts"),
        case("error after a byte-order mark", "\u{feff}species A = 1\nstep s A -> Q @ 1\n", 2, 13, "unknown species `Q`"),
        case("a 10 MB line", &huge, 2, 19, "expected the end of the line"),
        case("a 5 MB name", &long_name, 1, 9, "names are at most"),
        // Compartments, doses, infusions, events and time (one case per rule of the language).
        case("dose of an unknown species", "species A = 1\ndose Q += 5 molecules at 1 s\n", 2, 6, "unknown species `Q`"),
        case("dose of a clamped species", "species A = 1 clamped\ndose A += 5 molecules at 1 s\n", 2, 6, "clamped"),
        case("dose time without a unit", "species A = 1\ndose A += 5 molecules at 100\n", 2, 26, "with its unit"),
        case("repeated dose without an end", "species A = 1\ndose A += 5 molecules at 0 s every 1 h\n", 2, 36, "needs an end"),
        case("dose period of zero", "species A = 1\ndose A += 5 molecules at 0 s every 0 s times 3\n", 2, 36, "above 0 s"),
        case("dose schedule ending before it starts", "species A = 1\ndose A += 5 molecules at 2 h every 1 h until 1 h\n", 2, 46, "ends before its first dose"),
        case("until without every", "species A = 1\ndose A += 5 molecules at 2 h until 5 h\n", 2, 36, "needs `every"),
        case("dose count not whole", "species A = 1\ndose A += 5 molecules at 2 h every 1 h times 2.5\n", 2, 46, "whole number of doses"),
        case("dose in concentration without a volume", "species A = 1\ndose A += 5 nM at 1 s\n", 2, 11, "needs a volume"),
        case("dose that is not an amount", "species A = 1\ndose A += 5 s at 1 s\n", 2, 11, "concentration or molecules"),
        case("dose without +=", "species A = 1\ndose A 5 at 1 s\n", 2, 8, "expected `+=`"),
        case("event assigns a clamped species", "species A = 1 clamped\nstep s A -> 0 @ 1\nwhen A > 0 : A = 0\n", 3, 14, "clamped: an event cannot change it"),
        case("event assigns an unknown name", "species A = 1\nstep s A -> 0 @ 1\nwhen A > 0 : B = 0\n", 3, 14, "unknown name `B`"),
        case("event assigns a compartment", "compartment c = 1 fL\nspecies A = 1\nstep s A -> 0 @ 1\nwhen A > 0 nM : c = 2 fL\n", 4, 17, "is a compartment"),
        case("trigger on nothing", "species A = 1\nparam p = 2\nstep s A -> 0 @ p\nwhen p > 1 : A = 0\n", 4, 6, "can never trigger"),
        case("condition that is not a comparison", "species A = 1\nstep s A -> 0 @ 1\nwhen A : A = 0\n", 3, 6, "compares values"),
        case("time compared without a unit", "species A = 1\nstep s A -> 0 @ 1\nwhen time > 100 : A = 0\n", 3, 6, "times need a unit"),
        case("condition varying smoothly with time", "species A = 1\nstep s A -> 0 @ 1\nwhen sin(time / 1 s) > 0.5 : A = 0\n", 3, 6, "compared with a fixed time"),
        case("chained comparison", "species A = 1\nstep s A -> 0 @ 1\nwhen 0 < A < 5 : A = 0\n", 3, 12, "cannot be chained"),
        case("conflicting events at one instant", "species A = 1\nstep s A -> 0 @ 1\ndose A += 5 molecules at 10 s\nwhen time >= 10 s : A = 0\n", 4, 1, "conflicts with line 3"),
        case("one event assigns a name twice", "species A = 1\nstep s A -> 0 @ 1\nwhen A > 0 : A = 0, A += 1\n", 3, 21, "assigned twice"),
        case("assigned value of the wrong dimension", "volume 1 fL\nspecies A = 1\nstep s A -> 0 @ 1 /s\nwhen A > 0 nM : A = 2 s\n", 4, 21, "concentration or molecules"),
        case("event without a colon", "species A = 1\nstep s A -> 0 @ 1\nwhen A > 0 A = 0\n", 3, 12, "expected `:`"),
        case("event ending in something but at start", "species A = 1\nstep s A -> 0 @ 1\nwhen A > 0 : A = 0 at end\n", 3, 23, "expected `start`"),
        case("volume beside compartments", "volume 1 fL\ncompartment c = 2 fL\n", 2, 13, "not both"),
        case("species without its compartment", "compartment a = 1 fL\ncompartment b = 2 fL\nspecies A = 1\n", 3, 9, "say which compartment"),
        case("unknown compartment", "compartment a = 1 fL\nspecies A in z = 1\n", 2, 14, "unknown compartment `z`"),
        case("reactants in two compartments", "compartment a = 1 fL\ncompartment b = 2 fL\nspecies A in a = 1\nspecies B in b = 1\nstep s A + B -> 0 @ 1e6 /M/s\n", 5, 8, "different compartments"),
        case("zero-order products in two compartments", "compartment a = 1 fL\ncompartment b = 2 fL\nspecies A in a = 1\nspecies B in b = 1\nstep s 0 -> A + B @ 1 nM/s\n", 5, 6, "different compartments"),
        case("clearance on a second-order step", "volume 1 fL\nspecies A = 1\nspecies B = 1\nstep s A + B -> 0 @ clearance 1 fL/s\n", 4, 21, "first-order"),
        case("clearance without a volume", "species A = 1\nstep s A -> 0 @ clearance 1 fL/s\n", 2, 17, "needs the volume"),
        case("clearance that is not a volume per time", "volume 1 fL\nspecies A = 1\nstep s A -> 0 @ clearance 1 /s\n", 3, 27, "volume per time"),
        case("infusion rate without a unit", "species A = 1\ninfuse A at 5 from 1 s to 2 s\n", 2, 13, "amount per time"),
        case("infusion ending before it starts", "species A = 1\ninfuse A at 5 molecules/s from 2 s to 1 s\n", 2, 39, "end after it starts"),
        case("infusion of an unknown species", "species A = 1\ninfuse Q at 5 molecules/s from 1 s to 2 s\n", 2, 8, "unknown species `Q`"),
        case("pulse with a period of zero", "species A = 1\nstep s 0 -> A @ law 1 molecules/s * pulse(time, 0 s, 0 s)\n", 2, 37, "period > 0"),
        case("param named time", "param time = 3 s\n", 1, 7, "cannot name a param"),
        case("compartment named time", "compartment time = 3 fL\n", 1, 13, "cannot name a compartment"),
        case("half-life that events change", "species A = 1\nparam h = 2 s\nstep s A -> 0 @ half-life h\nwhen A > 5 : h = 3 s\n", 3, 27, "half-life cannot be a param that events change"),
        case("law that is a condition", "species A = 1\nstep s 0 -> A @ law A > 1\n", 2, 21, "a condition, not a rate"),
    ];
    v.push(Case {
        name: "binary bytes",
        text: vec![0x00, 0x01, 0xff, 0xfe, b'\n', 0x80],
        line: 1,
        col: 3,
        says: "not UTF-8",
    });
    v.push(Case {
        name: "UTF-16 text",
        text: b"\xff\xfes\x00p\x00e\x00c\x00".to_vec(),
        line: 1,
        col: 1,
        says: "UTF-16 text, not UTF-8",
    });
    v.push(Case {
        name: "binary after text",
        text: b"species A = 1\nstep s A -> 0 @ 1\n\x89PNG\r\n\x1a\n\x00\x00".to_vec(),
        line: 3,
        col: 1,
        says: "not UTF-8",
    });
    v
}

/// A scratch directory of its own for each test (tests run in parallel and remove theirs).
fn scratch(test: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("copyloop-bad-{}-{test}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

#[test]
fn every_bad_input_exits_2_with_its_location() {
    let dir = scratch("catalogue");
    let cases = catalogue();
    assert!(cases.len() >= 25);
    let mut failures = Vec::new();
    for (k, c) in cases.iter().enumerate() {
        let path = dir.join(format!("case{k}.crn"));
        std::fs::write(&path, &c.text).unwrap();
        let out = Command::new(env!("CARGO_BIN_EXE_copyloop"))
            .args(["check", path.to_str().unwrap()])
            .output()
            .unwrap();
        let stderr = String::from_utf8_lossy(&out.stderr);
        let loc = if c.col == 0 {
            format!("{}:{}:", path.display(), c.line)
        } else {
            format!("{}:{}:{}:", path.display(), c.line, c.col)
        };
        let ok = out.status.code() == Some(2)
            && stderr.contains(&loc)
            && stderr.contains(c.says)
            && !stderr.contains("panicked")
            && stderr.len() < 20_000;
        if !ok {
            let shown: String = stderr.chars().take(600).collect();
            failures.push(format!(
                "{}: status {:?}, wanted `{loc}` and `{}`, got:\n{shown}",
                c.name,
                out.status.code(),
                c.says
            ));
        }
    }
    let _ = std::fs::remove_dir_all(&dir);
    assert!(failures.is_empty(), "{}", failures.join("\n\n"));
}

#[test]
fn a_missing_file_exits_2() {
    let out = Command::new(env!("CARGO_BIN_EXE_copyloop"))
        .args(["check", "/nonexistent/net.crn"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("/nonexistent/net.crn"));
}

/// Runs `f` on a thread with a 2 MiB stack (the smallest a worker thread gets by default), so
/// that a walk whose depth grows with the input would overflow here.
fn on_small_stack<T: Send + 'static>(f: impl FnOnce() -> T + Send + 'static) -> T {
    std::thread::Builder::new()
        .stack_size(2 << 20)
        .spawn(f)
        .unwrap()
        .join()
        .unwrap()
}

fn load(text: String) -> Result<copyloop::Network, copyloop::Error> {
    copyloop::network::load_source("long.crn", text.as_bytes(), &Default::default())
}

/// A law of 10,000 terms and a condition of 10,000 alternatives compile (a chain is a tree as
/// deep as it is long; no walk may follow it down the stack), and the law's value is 10,000
/// times its term: sat(x, K) = x/(K + x) (the README's definition, the Michaelis–Menten
/// hyperbola [M]), here x = K so each term is k/2.
#[test]
fn a_law_of_ten_thousand_terms_compiles() {
    let net = on_small_stack(|| {
        let terms = vec!["k * sat(H, K)"; 10_000].join(" + ");
        let alternatives = vec!["H > 1 nM"; 10_000].join(" or ");
        load(format!(
            "volume 1 pL\nspecies H = 5 nM\nparam k = 1 nM/s\nparam K = 5 nM\n\
             step make 0 -> H @ law {terms}\nstep clear H -> 0 @ 0.1 /s\n\
             when {alternatives} : H = 0 nM\n"
        ))
        .expect("a 10,000-term law compiles")
    });
    let omega = net.omega;
    let h = net.species[0].initial;
    let x = h as f64 / omega;
    let k = 1e-9;
    let want = 10_000.0 * k * x / (5e-9 + x) * omega;
    let got = net.propensities()[0].eval(&[h]);
    assert!(
        (got - want).abs() <= 1e-9 * want,
        "propensity {got}, want {want}"
    );
    assert_eq!(net.events.len(), 1);
}

/// Expressions at the parser's nesting limit, mixing every operator at every level, compile
/// on a small stack (or are refused with a message, never a crash).
#[test]
fn nesting_at_the_limit_compiles_on_a_small_stack() {
    let mut body = String::from("A");
    for _ in 0..20 {
        body = format!("-(A + 2 * A ^ 2 / exp(ln(1 + {body} * 0)))");
    }
    let text = format!("species A = 3\nstep s A -> 0 @ law 1 + 0 * {body}\n");
    let out = on_small_stack(move || {
        load(text)
            .map(|n| n.reactions.len())
            .map_err(|e| e.to_string())
    });
    match out {
        Ok(m) => assert_eq!(m, 1),
        Err(e) => assert!(e.contains("nested") || e.contains("stack"), "{e}"),
    }
}

/// `check` shows a law exactly as written, its closing parenthesis included.
#[test]
fn check_shows_a_law_as_written() {
    let dir = scratch("paren");
    let path = dir.join("paren.crn");
    let law = "ks * K / (K + H)";
    std::fs::write(
        &path,
        format!(
            "volume 1 pL\nspecies H = 10 nM\nparam ks = 1 nM/s\nparam K = 5 nM\n\
             step make 0 -> H @ law {law}\nstep make2 0 -> H @ law (K + H) * ks / K\n"
        ),
    )
    .unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_copyloop"))
        .args(["check", "--json", path.to_str().unwrap()])
        .output()
        .unwrap();
    let _ = std::fs::remove_dir_all(&dir);
    assert_eq!(out.status.code(), Some(0));
    let doc: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let laws: Vec<&str> = doc["reactions"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["law"].as_str().unwrap())
        .collect();
    assert_eq!(laws, [law, "(K + H) * ks / K"]);
}

/// A UTF-8 byte-order mark at the start of a file is not part of its text.
#[test]
fn a_byte_order_mark_is_accepted() {
    let with = load("\u{feff}species A = 4\nstep s A -> 0 @ 1\n".into()).unwrap();
    let without = load("species A = 4\nstep s A -> 0 @ 1\n".into()).unwrap();
    assert_eq!(with.species, without.species);
}

/// Messages show huge and tiny numbers in exponent form, as the file or command line wrote
/// them: Rust's `{}` would print 1e-308 with 308 zeros. An f64 has at most 17 significant
/// digits in shortest round-trip form (IEEE 754-2019 §5.12.2 [M]), so no message needs a run
/// of more than 22 digits when the input has none.
#[test]
fn messages_show_extreme_numbers_in_exponent_form() {
    let dir = scratch("extreme");
    let files: &[(&str, &str, &[&str], &str)] = &[
        ("tiny count", "species A = 1e-308\n", &["check"], "`A` = 1e-308 is not a whole number"),
        ("nearly whole count", "species A = 3.0000000000000004\n", &["check"], "`A` = 3.0000000000000004 is not"),
        (
            "pulse of a huge negative period",
            "species A = 1\nstep s 0 -> A @ law 1 molecules/s * pulse(time, -1e300 s, 0 s)\n",
            &["check"],
            "found period -1e300 and width 0",
        ),
        (
            "events in conflict at 1e300 s",
            "species A = 1\nstep s A -> 0 @ 1\ndose A += 5 molecules at 1e300 s\nwhen time >= 1e300 s : A = 0\n",
            &["check"],
            "at t = 1e300 s",
        ),
        ("precision of 1e300", "species A = 1\nstep s A -> 0 @ 1\n", &["reconcile", "--precision", "1e300"], "got 1e300"),
        ("tolerance of -1e-300", "species A = 1\nstep s A -> 0 @ 1\n", &["reconcile", "--tolerance=-1e-300"], "got -1e-300"),
        ("t-end of -1e300", "species A = 1\nstep s A -> 0 @ 1\n", &["distribution", "--t-end=-1e300"], "got -1e300"),
    ];
    let mut failures = Vec::new();
    for (k, (name, text, args, says)) in files.iter().enumerate() {
        let path = dir.join(format!("extreme{k}.crn"));
        std::fs::write(&path, text).unwrap();
        let out = Command::new(env!("CARGO_BIN_EXE_copyloop"))
            .arg(args[0])
            .arg(&path)
            .args(&args[1..])
            .output()
            .unwrap();
        let stderr = String::from_utf8_lossy(&out.stderr);
        if out.status.code() != Some(2)
            || !stderr.contains(says)
            || support::longest_digits(&stderr) > 22
        {
            failures.push(format!(
                "{name}: status {:?}, wanted `{says}`, got:\n{stderr}",
                out.status.code()
            ));
        }
    }
    let _ = std::fs::remove_dir_all(&dir);
    assert!(failures.is_empty(), "{}", failures.join("\n\n"));
}

/// When `steady` finds no steady state it names the steps at fault with file:line:column:
/// those that make and remove a species that grows without bound (A -> 2 A at 1/s against
/// A -> 0 at 0.5/s: dA/dt = 0.5·A, exponential growth [C]), those that move an oscillating
/// species (the Lotka system, a centre with eigenvalues ±10i, Lotka 1920 [M]), and the law
/// that removes a species when none is left (a constant 5 molecules/s).
#[test]
fn steady_names_the_steps_at_fault() {
    let dir = scratch("steady");
    let cases: &[(&str, &str, &[&str])] = &[
        (
            "growth",
            "species A = 10\nstep grow A -> 2 A @ 1\nstep die A -> 0 @ 0.5\n",
            &["grows without bound", "what makes it, step `grow` (@:2:1)", "what removes it, step `die` (@:3:1)"],
        ),
        (
            "oscillation",
            "species Y1 = 1500\nspecies Y2 = 800\nstep a Y1 -> 2 Y1 @ 10\nstep b Y1 + Y2 -> 2 Y2 @ 0.01\nstep c Y2 -> 0 @ 10\n",
            &["sustained oscillation", "step `", "(@:"],
        ),
        (
            "negative",
            "species X = 10\nspecies Y = 0\nstep out X -> Y @ law 5\n",
            &["X becomes negative", "step `out` (@:3:1)"],
        ),
    ];
    let mut failures = Vec::new();
    for (name, text, says) in cases {
        let path = dir.join(format!("{name}.crn"));
        std::fs::write(&path, text).unwrap();
        let out = Command::new(env!("CARGO_BIN_EXE_copyloop"))
            .args(["steady", path.to_str().unwrap()])
            .output()
            .unwrap();
        let stderr = String::from_utf8_lossy(&out.stderr);
        let file = path.to_str().unwrap();
        let missing: Vec<String> = says
            .iter()
            .map(|s| s.replace('@', file))
            .filter(|s| !stderr.contains(s.as_str()))
            .collect();
        if out.status.code() != Some(2) || !missing.is_empty() {
            failures.push(format!(
                "{name}: status {:?}, missing {missing:?} in:\n{stderr}",
                out.status.code()
            ));
        }
    }
    let _ = std::fs::remove_dir_all(&dir);
    assert!(failures.is_empty(), "{}", failures.join("\n\n"));
}

/// Option errors name the command's own flags and come before any solve or run: `noise` says
/// `--burn-in` (it has no `--window`), `--t-end -1` is read as a number (no `-- -1` hint),
/// `--precision 0` and `--fit` without `--observe` are refused before the steady state is
/// sought (the network's law `3 - A` would otherwise be the first error), and `steady` refuses
/// that law at its step as `direct` does. Each message is the expected behaviour
/// (common practice for command lines: say which flag is wrong).
#[test]
fn option_errors_name_the_flag_and_come_first() {
    let dir = scratch("options");
    let fine = dir.join("bd.crn");
    std::fs::write(
        &fine,
        "species X = 10\nstep make 0 -> X @ 10\nstep decay X -> 0 @ 1 /s\n",
    )
    .unwrap();
    let bad = dir.join("neg.crn");
    std::fs::write(
        &bad,
        "species A = 0\nspecies B = 5\nstep make 0 -> A @ 5\nstep bad 0 -> A @ law 3 - A\n\
         step use B -> 0 @ 1\n",
    )
    .unwrap();
    let (fine, bad) = (fine.to_str().unwrap(), bad.to_str().unwrap());
    let located = format!("{bad}:4:1: step `bad`");
    let cases: Vec<(Vec<&str>, Vec<&str>, Vec<&str>)> = vec![
        (
            vec!["noise", fine, "--burn-in", "5", "--t-end", "2"],
            vec!["--burn-in"],
            vec!["--window"],
        ),
        (
            vec!["simulate", fine, "--t-end", "-1"],
            vec!["--t-end", "got -1 s"],
            vec!["-- -1"],
        ),
        (
            vec!["reconcile", bad, "--precision", "0"],
            vec!["--precision must lie strictly between 0 and 1, got 0"],
            vec!["step `bad`"],
        ),
        (
            vec!["reconcile", bad, "--fit", "k"],
            vec!["--fit needs an --observe"],
            vec!["step `bad`"],
        ),
        (
            vec!["steady", bad],
            vec![located.as_str(), "not negative"],
            vec![],
        ),
    ];
    let mut failures = Vec::new();
    for (args, says, never) in &cases {
        let out = Command::new(env!("CARGO_BIN_EXE_copyloop"))
            .args(args)
            .output()
            .unwrap();
        let stderr = String::from_utf8_lossy(&out.stderr);
        let ok = out.status.code() == Some(2)
            && says.iter().all(|s| stderr.contains(s))
            && !never.iter().any(|s| stderr.contains(s));
        if !ok {
            failures.push(format!(
                "{args:?}: status {:?}, wanted {says:?} and none of {never:?}:\n{stderr}",
                out.status.code()
            ));
        }
    }
    let _ = std::fs::remove_dir_all(&dir);
    assert!(failures.is_empty(), "{}", failures.join("\n\n"));
}

/// Sizes past what the machine can hold are refused with the stated limit, before any
/// allocation (a `--grid` of 2^64 − 1 once panicked on capacity overflow, 2^32 aborted on
/// allocation, a `--vary` of 2^64 − 1 values panicked, and `--threads` had no bound).
#[test]
fn huge_sizes_are_refused_with_their_limit() {
    let dir = scratch("sizes");
    let file = dir.join("bd.crn");
    std::fs::write(
        &file,
        "species X = 10\nparam k = 10\nstep make 0 -> X @ k\nstep decay X -> 0 @ 1 /s\n",
    )
    .unwrap();
    let out_file = dir.join("s.jsonl");
    let (f, o) = (file.to_str().unwrap(), out_file.to_str().unwrap());
    let cases: Vec<(Vec<&str>, &str)> = vec![
        (
            vec![
                "simulate",
                f,
                "--t-end",
                "1",
                "--grid",
                "18446744073709551615",
            ],
            "2 to 1000000 points",
        ),
        (
            vec!["simulate", f, "--t-end", "1", "--grid", "4294967296"],
            "2 to 1000000 points",
        ),
        (
            vec![
                "simulate",
                f,
                "--t-end",
                "1",
                "--threads",
                "18446744073709551615",
            ],
            "at most 1024 threads",
        ),
        (
            vec!["simulate", f, "--t-end", "1", "--threads", "100000"],
            "at most 1024 threads",
        ),
        (
            vec![
                "sweep",
                f,
                "--vary",
                "k=lin:1..2:18446744073709551615",
                "--task",
                "steady",
                "--out",
                o,
            ],
            "more than a sweep may have (100000000)",
        ),
    ];
    let mut failures = Vec::new();
    for (args, says) in &cases {
        let out = Command::new(env!("CARGO_BIN_EXE_copyloop"))
            .args(args)
            .output()
            .unwrap();
        let stderr = String::from_utf8_lossy(&out.stderr);
        if out.status.code() != Some(2) || !stderr.contains(says) || stderr.contains("panicked") {
            failures.push(format!(
                "{args:?}: status {:?}, wanted `{says}`:\n{stderr}",
                out.status.code()
            ));
        }
    }
    let _ = std::fs::remove_dir_all(&dir);
    assert!(failures.is_empty(), "{}", failures.join("\n\n"));
}
