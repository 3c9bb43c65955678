//! Fuzz harness for the command line: mutated problem directories run as a user's script
//! would run them (`tangency solve DIR --json --out OUT [--method M]`, under a 4 GiB
//! address-space limit set with `ulimit -v`, with a timeout).
//!
//! Every case fails the harness on: a signal (panic abort, SIGABRT, SIGSEGV), a hang past
//! the timeout, an exit code outside the contract (0, 2, 3, 4), stdout that is not exactly
//! one JSON object, a `status` that disagrees with the exit code, exit 0 on a mutation that
//! makes the input invalid for certain, and for exit 0: a non-finite x or y, or residuals
//! that do not match those recomputed here from the files (with a reader of this file,
//! independent of the crate's).
//!
//! Mutations (one to three per case, on a random small valid problem): size-line numbers
//! (huge, beyond 64 bits, ±1, zero), entry counts, tokens (deleted, doubled, replaced by
//! words, NaN, infinities, overflowing or huge literals), fields (`integer`, `pattern`,
//! `complex`, unknown), symmetry words, duplicated entry lines, file kinds (FIFO, dangling
//! symlink, symlink to a valid file, directory, empty, binary), magnitudes (values times
//! 1e±100, 1e±300, set to 1.5e308), truncation and removal.
//!
//! Quick version (in `cargo test`): 300 cases. Long run (documented command):
//!
//! ```text
//! FUZZ_CASES=100000 FUZZ_SEED=1 nice -n 19 cargo test --release --test fuzz_cli -- --ignored --nocapture
//! ```
//!
//! (`FUZZ_BIN=path` runs a copy of the binary instead of the one cargo built.)

use std::fmt::Write as _;
use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// xorshift64* (deterministic, no dependency).
struct Rng(u64);

impl Rng {
    fn new(seed: u64) -> Self {
        Rng(seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) | 1)
    }
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }
    fn below(&mut self, k: usize) -> usize {
        (self.next() % k.max(1) as u64) as usize
    }
    fn uniform(&mut self) -> f64 {
        (self.next() >> 11) as f64 / (1u64 << 53) as f64 * 2.0 - 1.0
    }
    fn pick<'a, T>(&mut self, v: &'a [T]) -> &'a T {
        &v[self.below(v.len())]
    }
}

/// One file of a case: text, or a special kind.
#[derive(Clone, Debug)]
enum File {
    Text(String),
    Fifo,
    DanglingLink,
    LinkTo(String),
    Directory,
    Bytes(Vec<u8>),
}

struct Case {
    files: Vec<(&'static str, File)>,
    /// The mutations applied, for the failure message.
    log: Vec<String>,
    /// Files that the last mutation of each made invalid for certain.
    invalid_files: Vec<&'static str>,
    /// Files mutated so far (a second mutation of a file may repair the first: its
    /// validity is then unknown, unless the mutation replaces the file's kind).
    mutated: Vec<&'static str>,
}

impl Case {
    fn mark(&mut self, name: &'static str, invalid: bool, whole_file: bool) {
        let again = self.mutated.contains(&name);
        self.invalid_files.retain(|f| *f != name);
        if invalid && (whole_file || !again) {
            self.invalid_files.push(name);
        }
        self.mutated.push(name);
    }
}

fn coordinate(rows: usize, cols: usize, sym: &str, entries: &[(usize, usize, f64)]) -> String {
    let mut s = format!(
        "%%MatrixMarket matrix coordinate real {sym}\n{rows} {cols} {}\n",
        entries.len()
    );
    for (i, j, v) in entries {
        let _ = writeln!(s, "{} {} {v:e}", i + 1, j + 1);
    }
    s
}

fn array(rows: usize, cols: usize, col_major: &[f64]) -> String {
    let mut s = format!("%%MatrixMarket matrix array real general\n{rows} {cols}\n");
    for v in col_major {
        let _ = writeln!(s, "{v:e}");
    }
    s
}

/// A random valid problem: n ≤ 6, m ≤ 3, H = diagonal-dominant (sometimes indefinite),
/// coordinate or array storage, symmetric or general H.
fn base(rng: &mut Rng) -> Vec<(&'static str, File)> {
    let n = 1 + rng.below(6);
    let m = rng.below(n.min(3) + 1);
    let mut h = vec![0.0; n * n];
    for i in 0..n {
        for j in 0..i {
            if rng.below(3) == 0 {
                let v = rng.uniform();
                h[i * n + j] = v;
                h[j * n + i] = v;
            }
        }
        h[i * n + i] = if rng.below(8) == 0 {
            -1.0
        } else {
            n as f64 + rng.uniform().abs()
        };
    }
    let mut files = Vec::new();
    let h_text = match rng.below(3) {
        0 => {
            let lower: Vec<_> = (0..n)
                .flat_map(|j| (j..n).map(move |i| (i, j)))
                .filter(|&(i, j)| h[i * n + j] != 0.0)
                .map(|(i, j)| (i, j, h[i * n + j]))
                .collect();
            coordinate(n, n, "symmetric", &lower)
        }
        1 => {
            let all: Vec<_> = (0..n)
                .flat_map(|i| (0..n).map(move |j| (i, j)))
                .filter(|&(i, j)| h[i * n + j] != 0.0)
                .map(|(i, j)| (i, j, h[i * n + j]))
                .collect();
            coordinate(n, n, "general", &all)
        }
        _ => {
            let cm: Vec<f64> = (0..n * n).map(|k| h[(k % n) * n + k / n]).collect();
            array(n, n, &cm)
        }
    };
    files.push(("H.mtx", File::Text(h_text)));
    let c: Vec<f64> = (0..n).map(|_| rng.uniform()).collect();
    if rng.below(4) != 0 {
        files.push(("c.mtx", File::Text(array(n, 1, &c))));
    }
    if m > 0 {
        let mut a = Vec::new();
        for i in 0..m {
            a.push((i, i, 1.0 + rng.uniform().abs()));
            for j in 0..n {
                if j != i && rng.below(2) == 0 {
                    a.push((i, j, rng.uniform()));
                }
            }
        }
        let text = if rng.below(2) == 0 {
            coordinate(m, n, "general", &a)
        } else {
            let mut d = vec![0.0; m * n];
            for &(i, j, v) in &a {
                d[j * m + i] = v;
            }
            array(m, n, &d)
        };
        files.push(("A.mtx", File::Text(text)));
        let b: Vec<f64> = (0..m).map(|_| rng.uniform()).collect();
        files.push(("b.mtx", File::Text(array(m, 1, &b))));
    }
    files
}

const WORDS: &[&str] = &[
    "x",
    "nan",
    "NaN",
    "inf",
    "-inf",
    "infinity",
    "1e999",
    "-1e999",
    "1.5e308",
    "-0",
    "0x10",
    "1e-400",
    "99999999999999999999999",
    "18446744073709551616",
    "18446744073709551615",
    "4294967296",
    "2000000000",
    "-1",
    "0",
    "1.",
    ".5",
    "+1",
    "1e",
    "é",
];

/// Applies one random mutation to `case`.
fn mutate(rng: &mut Rng, case: &mut Case) {
    if case.files.is_empty() {
        return;
    }
    let k = rng.below(case.files.len());
    let name = case.files[k].0;
    let kind = rng.below(13);
    let text = match &case.files[k].1 {
        File::Text(t) => t.clone(),
        _ => {
            case.log.push(format!("{name}: (special file left as is)"));
            return;
        }
    };
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    if lines.is_empty() {
        case.log.push(format!("{name}: (empty file left as is)"));
        return;
    }
    let size_idx = lines.iter().position(|l| !l.starts_with('%')).unwrap_or(0);
    let entry_lines: Vec<usize> = (size_idx + 1..lines.len()).collect();
    let mut invalid = false;
    let what = match kind {
        0 => {
            // Size line numbers.
            let mut toks: Vec<String> = lines[size_idx].split_whitespace().map(str::to_string).collect();
            if toks.is_empty() {
                return;
            }
            let t = rng.below(toks.len());
            let new = rng
                .pick(&[
                    "18446744073709551616",
                    "99999999999999999999999",
                    "18446744073709551615",
                    "4294967296",
                    "2000000000",
                    "0",
                    "+1",
                    "x",
                ])
                .to_string();
            let old: usize = toks[t].parse().unwrap_or(0);
            let new = match rng.below(3) {
                0 => new,
                1 => (old + 1).to_string(),
                _ => old.saturating_sub(1).to_string(),
            };
            invalid = new.len() >= 10 || new == "x" || new == "+1";
            toks[t] = new.clone();
            lines[size_idx] = toks.join(" ");
            format!("size token {t} -> {new}")
        }
        1 => {
            // Delete or double a token of an entry line.
            if entry_lines.is_empty() {
                return;
            }
            let l = *rng.pick(&entry_lines);
            let mut toks: Vec<String> = lines[l].split_whitespace().map(str::to_string).collect();
            if toks.is_empty() {
                return;
            }
            let t = rng.below(toks.len());
            if rng.below(2) == 0 {
                toks.remove(t);
            } else {
                toks.insert(t, toks[t].clone());
            }
            // A line left empty is skipped like a blank line, so not invalid by itself.
            invalid = !toks.is_empty();
            lines[l] = toks.join(" ");
            format!("line {} tokens -> {:?}", l + 1, lines[l])
        }
        2 => {
            // Replace a token of an entry line with a word.
            if entry_lines.is_empty() {
                return;
            }
            let l = *rng.pick(&entry_lines);
            let mut toks: Vec<String> = lines[l].split_whitespace().map(str::to_string).collect();
            if toks.is_empty() {
                return;
            }
            let t = rng.below(toks.len());
            let w = rng.pick(WORDS).to_string();
            let is_value = t == toks.len() - 1 && (toks.len() == 3 || toks.len() == 1);
            invalid = if is_value {
                !matches!(
                    w.as_str(),
                    "1.5e308" | "-0" | "0" | "1." | ".5" | "+1" | "-1" | "1e-400" | "4294967296"
                ) && !w.chars().all(|c| c.is_ascii_digit())
            } else {
                !(w == "1" || w.chars().all(|c| c.is_ascii_digit()) && w.len() < 2)
            };
            toks[t] = w.clone();
            lines[l] = toks.join(" ");
            format!("line {} token {t} -> {w}", l + 1)
        }
        3 => {
            // Field word.
            let f = *rng.pick(&["integer", "pattern", "complex", "double", "quaternion", "REAL"]);
            let mut toks: Vec<String> = lines[0].split_whitespace().map(str::to_string).collect();
            if toks.len() < 5 {
                return;
            }
            toks[3] = f.to_string();
            invalid = matches!(f, "complex" | "quaternion") || (f == "pattern");
            lines[0] = toks.join(" ");
            format!("field -> {f}")
        }
        4 => {
            // Symmetry word.
            let s = *rng.pick(&["general", "symmetric", "skew-symmetric", "hermitian", "upper"]);
            let mut toks: Vec<String> = lines[0].split_whitespace().map(str::to_string).collect();
            if toks.len() < 5 {
                return;
            }
            toks[4] = s.to_string();
            invalid = matches!(s, "hermitian" | "upper");
            lines[0] = toks.join(" ");
            format!("symmetry -> {s}")
        }
        5 => {
            // Duplicate an entry line (and raise the count of a coordinate file).
            if entry_lines.is_empty() {
                return;
            }
            let l = *rng.pick(&entry_lines);
            let dup = lines[l].clone();
            lines.insert(l + 1, dup);
            let mut toks: Vec<String> = lines[size_idx].split_whitespace().map(str::to_string).collect();
            if toks.len() == 3 && rng.below(4) != 0 {
                let c: usize = toks[2].parse().unwrap_or(0);
                toks[2] = (c + 1).to_string();
                lines[size_idx] = toks.join(" ");
            } else {
                invalid = true; // one line more than declared
            }
            format!("duplicated line {}", l + 1)
        }
        6 => {
            // File kind.
            let (f, bad) = match rng.below(6) {
                0 => (File::Fifo, true),
                1 => (File::DanglingLink, true),
                2 => (File::Directory, true),
                3 => (File::Text(String::new()), true),
                4 => (File::Bytes(vec![0xff, 0x00, 0xfe, b'\n', 0x80]), true),
                _ => (File::LinkTo(text.clone()), false),
            };
            case.log.push(format!("{name}: kind -> {f:?}"));
            case.mark(name, bad, true);
            case.files[k].1 = f;
            return;
        }
        7 => {
            // Magnitudes of every value.
            let s = *rng.pick(&[1e100, 1e-100, 1e300, 1e-300, 1e150, 1e-150]);
            let value_col = |l: &str| l.split_whitespace().count();
            for &l in &entry_lines {
                let mut toks: Vec<String> = lines[l].split_whitespace().map(str::to_string).collect();
                let cnt = value_col(&lines[l]);
                if cnt == 3 || cnt == 1 {
                    if let Ok(v) = toks[cnt - 1].parse::<f64>() {
                        toks[cnt - 1] = format!("{:e}", v * s);
                    }
                }
                lines[l] = toks.join(" ");
            }
            format!("values times {s:e}")
        }
        8 => {
            // One value set to 1.5e308 (duplicates of it may overflow when summed).
            if entry_lines.is_empty() {
                return;
            }
            let l = *rng.pick(&entry_lines);
            let mut toks: Vec<String> = lines[l].split_whitespace().map(str::to_string).collect();
            if let Some(last) = toks.last_mut() {
                *last = "1.5e308".into();
            }
            lines[l] = toks.join(" ");
            format!("line {} value -> 1.5e308", l + 1)
        }
        9 => {
            // Truncate.
            let keep = rng.below(lines.len() + 1);
            invalid = keep <= size_idx || keep < lines.len();
            lines.truncate(keep);
            format!("truncated to {keep} line(s)")
        }
        10 => {
            // Remove the file (H is required; the others have defaults).
            case.log.push(format!("{name}: removed"));
            case.mark(name, name == "H.mtx", true);
            case.files.remove(k);
            return;
        }
        11 => {
            // Declared entry count off by one.
            let mut toks: Vec<String> = lines[size_idx].split_whitespace().map(str::to_string).collect();
            if toks.len() != 3 {
                return;
            }
            let c: usize = toks[2].parse().unwrap_or(0);
            let new = if rng.below(2) == 0 { c + 1 } else { c.saturating_sub(1) };
            let actual = lines[size_idx + 1..]
                .iter()
                .filter(|l| !l.trim().is_empty() && !l.starts_with('%'))
                .count();
            invalid = new != actual;
            toks[2] = new.to_string();
            lines[size_idx] = toks.join(" ");
            format!("count {c} -> {new}")
        }
        _ => {
            // Transpose a vector's shape (n×1 -> 1×n is valid) or mangle the banner.
            if rng.below(2) == 0 {
                let toks: Vec<String> = lines[size_idx].split_whitespace().map(str::to_string).collect();
                if toks.len() == 2 && toks[1] == "1" && lines[0].contains("array") {
                    lines[size_idx] = format!("1 {}", toks[0]);
                    "vector transposed".to_string()
                } else {
                    return;
                }
            } else {
                lines[0] = rng
                    .pick(&[
                        "%%MatrixMarket",
                        "%%MatrixMarket matrix",
                        "%MatrixMarket matrix coordinate real general",
                        "%%MatrixMarket tensor coordinate real general",
                    ])
                    .to_string();
                invalid = true;
                format!("banner -> {}", lines[0])
            }
        }
    };
    let mut new_text = lines.join("\n");
    new_text.push('\n');
    case.files[k].1 = File::Text(new_text);
    case.mark(name, invalid, false);
    case.log.push(format!("{name}: {what}"));
}

fn write_case(dir: &Path, case: &Case) {
    for (name, f) in &case.files {
        let p = dir.join(name);
        match f {
            File::Text(t) => std::fs::write(&p, t).unwrap(),
            File::Bytes(b) => std::fs::write(&p, b).unwrap(),
            File::Directory => std::fs::create_dir(&p).unwrap(),
            File::DanglingLink => std::os::unix::fs::symlink(dir.join("does-not-exist.mtx"), &p).unwrap(),
            File::LinkTo(t) => {
                let target = dir.join(format!("target-{name}"));
                std::fs::write(&target, t).unwrap();
                std::os::unix::fs::symlink(&target, &p).unwrap();
            }
            File::Fifo => {
                let ok = Command::new("mkfifo")
                    .arg(&p)
                    .status()
                    .map(|s| s.success())
                    .unwrap_or(false);
                assert!(ok, "mkfifo failed");
            }
        }
    }
}

/// A small reader of Matrix Market text for the residual check (independent of the
/// crate's reader; used only on inputs the tool accepted). Returns dense column-major.
fn reference_read(path: &Path) -> Option<(usize, usize, Vec<f64>)> {
    let text = std::fs::read_to_string(path).ok()?;
    let mut lines = text.lines();
    let banner = lines.next()?.to_ascii_lowercase();
    let w: Vec<&str> = banner.split_whitespace().collect();
    if w.len() < 5 {
        return None;
    }
    let (dense, field, sym) = (w[2] == "array", w[3], w[4]);
    let mut body = lines.filter(|l| !l.trim().is_empty() && !l.starts_with('%'));
    let size: Vec<usize> = body.next()?.split_whitespace().map(|t| t.parse().unwrap()).collect();
    let (r, c) = (size[0], size[1]);
    let mut m = vec![0.0; r * c];
    let sign = if sym == "skew-symmetric" { -1.0 } else { 1.0 };
    let mut put = |i: usize, j: usize, v: f64| {
        m[j * r + i] += v;
        if sym != "general" && i != j {
            m[i * r + j] += sign * v;
        }
    };
    if dense {
        let mut vals = body.map(|l| l.trim().parse::<f64>().unwrap());
        for j in 0..c {
            let start = match sym {
                "general" => 0,
                "symmetric" => j,
                _ => j + 1,
            };
            for i in start..r {
                put(i, j, vals.next()?);
            }
        }
    } else {
        for l in body {
            let t: Vec<&str> = l.split_whitespace().collect();
            let v = if field == "pattern" { 1.0 } else { t[2].parse().unwrap() };
            put(
                t[0].parse::<usize>().unwrap() - 1,
                t[1].parse::<usize>().unwrap() - 1,
                v,
            );
        }
    }
    Some((r, c, m))
}

fn json_f64(v: &serde_json::Value) -> f64 {
    v.as_f64().unwrap_or(f64::NAN)
}

/// Recomputes the residuals of a solved case from the files and compares.
#[allow(clippy::needless_range_loop)]
fn check_solution(dir: &Path, out: &Path, j: &serde_json::Value) -> Result<(), String> {
    let (n, _, h) = reference_read(&dir.join("H.mtx")).ok_or("H unreadable by the reference reader")?;
    let vec_of = |name: &str, len: usize| -> Vec<f64> {
        match reference_read(&dir.join(name)) {
            Some((_, _, v)) => v,
            None => vec![0.0; len],
        }
    };
    let c = vec_of("c.mtx", n);
    let (m, a) = match reference_read(&dir.join("A.mtx")) {
        Some((m, _, a)) => (m, a),
        None => (0, Vec::new()),
    };
    let b = vec_of("b.mtx", m);
    if h.len() != n * n || c.len() != n || a.len() != m * n || b.len() != m {
        return Err(format!(
            "solved, but the files read here have other sizes: H {} for n = {n}, c {}, A {} for m = {m}, b {}",
            h.len(),
            c.len(),
            a.len(),
            b.len()
        ));
    }
    let x = reference_read(&out.join("x.mtx")).ok_or("x.mtx missing")?.2;
    let y = reference_read(&out.join("multipliers.mtx")).map_or(Vec::new(), |v| v.2);
    if x.len() != n || y.len() != m {
        return Err(format!(
            "x has {} entries for n = {n}, y {} for m = {m}",
            x.len(),
            y.len()
        ));
    }
    if let Some(v) = x.iter().chain(&y).find(|v| !v.is_finite()) {
        return Err(format!("non-finite entry {v} in a solved answer"));
    }
    // Symmetric H: the stored (symmetrized) H is what was solved; use (H + Hᵀ)/2.
    let hs = |i: usize, k: usize| 0.5 * h[k * n + i] + 0.5 * h[i * n + k];
    let mut dual = 0.0f64;
    let mut scale_d = 0.0f64;
    for i in 0..n {
        let mut s = c[i];
        let mut mag = c[i].abs();
        for k in 0..n {
            s += hs(i, k) * x[k];
            mag += (hs(i, k) * x[k]).abs();
        }
        for r in 0..m {
            s += a[i * m + r] * y[r];
            mag += (a[i * m + r] * y[r]).abs();
        }
        dual = dual.max(s.abs());
        scale_d = scale_d.max(mag);
    }
    let mut primal = 0.0f64;
    let mut scale_p = 0.0f64;
    for r in 0..m {
        let mut s = -b[r];
        let mut mag = b[r].abs();
        for k in 0..n {
            s += a[k * m + r] * x[k];
            mag += (a[k * m + r] * x[k]).abs();
        }
        primal = primal.max(s.abs());
        scale_p = scale_p.max(mag);
    }
    let (rep_p, rep_d) = (json_f64(&j["primal_residual"]), json_f64(&j["dual_residual"]));
    let close = |rep: f64, rec: f64, scale: f64| (rep - rec).abs() <= 1e-9 * scale + 1e-300;
    if !close(rep_p, primal, scale_p) || !close(rep_d, dual, scale_d) {
        return Err(format!(
            "reported residuals (primal {rep_p:e}, dual {rep_d:e}) differ from recomputed ({primal:e}, {dual:e}; \
             scales {scale_p:e}, {scale_d:e})"
        ));
    }
    // The accuracy it reports must hold: the normwise backward error
    // ‖r‖∞ / (‖K‖∞‖z‖∞ + ‖rhs‖∞), recomputed here, within 10× the reported one (+1e-14).
    let mut norm_k = 0.0f64;
    for i in 0..n {
        let row: f64 = (0..n).map(|k| hs(i, k).abs()).sum::<f64>() + (0..m).map(|r| a[i * m + r].abs()).sum::<f64>();
        norm_k = norm_k.max(row);
    }
    for r in 0..m {
        norm_k = norm_k.max((0..n).map(|k| a[k * m + r].abs()).sum::<f64>());
    }
    let zmax = x.iter().chain(&y).fold(0.0f64, |acc, v| acc.max(v.abs()));
    let rhsmax = c.iter().chain(&b).fold(0.0f64, |acc, v| acc.max(v.abs()));
    let denom = norm_k * zmax + rhsmax;
    let omega = if denom > 0.0 {
        primal.max(dual) / denom
    } else {
        primal.max(dual)
    };
    let reported = json_f64(&j["backward_error"]);
    if omega.is_nan() || omega > 10.0 * reported + 1e-14 {
        return Err(format!(
            "recomputed backward error {omega:e} exceeds the reported {reported:e} (primal {primal:e}, dual {dual:e})"
        ));
    }
    Ok(())
}

const METHODS: &[&str] = &["auto", "dense", "sparse", "schur", "nullspace", "minres", "pcg"];
const TIMEOUT: Duration = Duration::from_secs(30);

/// Runs one case; `Err` describes a failure of the contract.
fn run_case(bin: &str, rng: &mut Rng, stats: &mut [usize; 5]) -> Result<(), String> {
    let mut case = Case {
        files: base(rng),
        log: Vec::new(),
        invalid_files: Vec::new(),
        mutated: Vec::new(),
    };
    for _ in 0..1 + rng.below(3) {
        mutate(rng, &mut case);
    }
    let dir = tempfile::tempdir().unwrap();
    let pdir = dir.path().join("p");
    std::fs::create_dir(&pdir).unwrap();
    write_case(&pdir, &case);
    let out = dir.path().join("out");
    let method = *rng.pick(METHODS);
    let describe = |msg: String| format!("{msg}\n  mutations: {:?}\n  method: {method}", case.log);
    let mut child = Command::new("sh")
        .arg("-c")
        .arg("ulimit -v 4194304; exec \"$0\" \"$@\"")
        .arg(bin)
        .args([
            "solve",
            pdir.to_str().unwrap(),
            "--json",
            "--method",
            method,
            "--out",
            out.to_str().unwrap(),
        ])
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let start = Instant::now();
    let status = loop {
        if let Some(s) = child.try_wait().unwrap() {
            break s;
        }
        if start.elapsed() > TIMEOUT {
            let _ = child.kill();
            let _ = child.wait();
            return Err(describe(format!("hang: no exit after {TIMEOUT:?}")));
        }
        std::thread::sleep(Duration::from_millis(2));
    };
    let output = child.wait_with_output().unwrap();
    let stdout = String::from_utf8_lossy(&output.stdout);
    let stderr = String::from_utf8_lossy(&output.stderr);
    let Some(code) = status.code() else {
        return Err(describe(format!("killed by a signal ({status}); stderr: {stderr}")));
    };
    if ![0, 2, 3, 4].contains(&code) {
        return Err(describe(format!(
            "exit code {code}; stdout {stdout:?}; stderr {stderr:?}"
        )));
    }
    stats[[0, 2, 3, 4].iter().position(|&c| c == code).unwrap()] += 1;
    let j: serde_json::Value = serde_json::from_str(stdout.trim())
        .map_err(|e| describe(format!("stdout is not one JSON object ({e}): {stdout:?}")))?;
    let status_word = j["status"].as_str().unwrap_or("");
    let expected: &[&str] = match code {
        0 => &["solved"],
        2 => &["invalid_input"],
        3 => &["singular", "infeasible", "unbounded", "overflow", "inaccurate"],
        _ => &["not_converged"],
    };
    if !expected.contains(&status_word) {
        return Err(describe(format!("exit {code} with status {status_word:?}")));
    }
    if code != 0 {
        let msg = j["message"].as_str().unwrap_or("");
        if msg.is_empty() {
            return Err(describe(format!("exit {code} without a message: {stdout}")));
        }
        if code == 2 && msg.contains("Kind") {
            return Err(describe(format!("raw parser dump in the message: {msg}")));
        }
        return Ok(());
    }
    if !case.invalid_files.is_empty() {
        stats[4] += 1;
        return Err(describe(format!("exit 0 on invalid input: {stdout}")));
    }
    check_solution(&pdir, &out, &j).map_err(describe)
}

fn campaign(cases: usize, seed: u64) {
    // FUZZ_BIN: a copy of the binary, so that a long run is not disturbed by rebuilds.
    let bin = std::env::var("FUZZ_BIN").unwrap_or_else(|_| env!("CARGO_BIN_EXE_tangency").to_string());
    let bin = bin.as_str();
    let mut rng = Rng::new(seed);
    let mut stats = [0usize; 5];
    let mut failures = Vec::new();
    let t = Instant::now();
    for k in 0..cases {
        if let Err(e) = run_case(bin, &mut rng, &mut stats) {
            failures.push(format!("case {k} (seed {seed}): {e}"));
        }
        if (k + 1) % 5000 == 0 {
            eprintln!(
                "{} cases, {:.0} cases/min, exits 0/2/3/4 = {:?}, failures {}",
                k + 1,
                (k + 1) as f64 / t.elapsed().as_secs_f64() * 60.0,
                &stats[..4],
                failures.len()
            );
        }
    }
    let ran = stats[..4].iter().sum::<usize>() + failures.len().saturating_sub(stats[4]);
    eprintln!(
        "fuzz: {cases} cases in {:.1} s ({:.0}/min); exits 0/2/3/4 = {:?}; {} failure(s)",
        t.elapsed().as_secs_f64(),
        cases as f64 / t.elapsed().as_secs_f64() * 60.0,
        &stats[..4],
        failures.len()
    );
    // Every case ends in an exit code or a recorded failure (a signal or a hang).
    assert!(ran >= cases, "only {ran} of {cases} cases ran");
    assert!(
        stats[0] > 0 && stats[1] > 0,
        "the campaign should reach both solved and invalid cases: {stats:?}"
    );
    for f in failures.iter().take(20) {
        eprintln!("{f}");
    }
    assert!(
        failures.is_empty(),
        "{} failure(s); first: {}",
        failures.len(),
        failures[0]
    );
}

/// The quick version kept in `cargo test`: 300 cases.
#[test]
fn fuzz_quick() {
    campaign(300, 13);
}

/// The long campaign (see the module docs for the command); `FUZZ_CASES` (default
/// 100 000) and `FUZZ_SEED` (default 1).
#[test]
#[ignore = "long: FUZZ_CASES=100000 nice -n 19 cargo test --release --test fuzz_cli -- --ignored --nocapture"]
fn fuzz_long() {
    let cases = std::env::var("FUZZ_CASES")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(100_000);
    let seed = std::env::var("FUZZ_SEED")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(1);
    campaign(cases, seed);
}
