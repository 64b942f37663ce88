//! Parameters files of `certify` (key = value), then the parameters'
//! own checks.
#![no_main]
use libfuzzer_sys::fuzz_target;
use sluice::certify::eat::EatParams;
use sluice::files::keyvalue;

const KEYS: [&str; 7] = [
    "rounds",
    "test-probability",
    "expected-win",
    "tolerance",
    "smoothing",
    "acceptance",
    "estimation-error",
];

fuzz_target!(|data: &[u8]| {
    let Ok(kv) = keyvalue::parse(data, &KEYS) else {
        return;
    };
    let get = |k: &str| kv.iter().find(|e| e.0 == k).and_then(|e| keyvalue::parse_number::<f64>(&e.1));
    let rounds = kv
        .iter()
        .find(|e| e.0 == "rounds")
        .and_then(|e| keyvalue::parse_number::<u64>(&e.1));
    if let (Some(n), Some(g), Some(w), Some(d), Some(s), Some(a)) = (
        rounds,
        get("test-probability"),
        get("expected-win"),
        get("tolerance"),
        get("smoothing"),
        get("acceptance"),
    ) {
        let p = EatParams {
            n_rounds: n,
            gamma: g,
            w_exp: w,
            delta: d,
            eps_s: s,
            eps_ea: a,
        };
        let _ = p.validate();
    }
});
