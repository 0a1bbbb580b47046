//! The roadmap solver against `scipy.optimize.milp` (HiGHS from Python) on the same generated
//! instances (`benches/roadmap/instances.rs`): realistic and adversarial, 10 to 200 candidates
//! over 12 quarters.
//!
//! ```text
//! pip install -r benches/requirements-roadmap.txt
//! cargo bench --bench roadmap                     # finance::roadmap with microlp
//! cargo bench --bench roadmap --features highs    # with HiGHS
//! cargo bench --bench roadmap -- --limit 30 realistic-1   # time limit, names containing ..
//! cargo bench --bench roadmap -- --runs 5 realistic-30     # the median of 5 runs each
//! ```
//! Each instance is written to `target/roadmap-bench/<name>.json`; `finance::roadmap::roadmap`
//! solves it with the time limit (10 s unless `--limit` or `ROADMAP_BENCH_LIMIT` says), then
//! `benches/roadmap_scipy.py` solves the same file with the same limit. With `--runs N` each side
//! solves each instance N times, in turns, and the table shows the median time with the range
//! beside it: on a shared 2-core machine one run's time varies by a fifth. Both plans are checked
//! with `finance::roadmap::check`, and the table says whether the two values agree to the cent.
//! Results go to `target/roadmap-bench/results-<backend>.json`; when a run of the other
//! backend with the same limit is there, a table of all three follows.
//! A benchmark, not a test: `cargo test` neither builds nor runs it, and the binary does
//! nothing unless cargo bench started it (`--bench`).
#![expect(clippy::expect_used, reason = "a benchmark binary, not a request path")]

#[path = "roadmap/instances.rs"]
mod instances;

use pilot_ledger::finance::roadmap::{Instance, Placement, check, roadmap, value_at};
use rust_decimal::Decimal;
use rust_decimal::prelude::ToPrimitive;
use serde_json::{Value, json};
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::{Duration, Instant};

/// The solver behind `finance::roadmap` in this build.
const BACKEND: &str = if cfg!(feature = "highs") { "highs" } else { "microlp" };
/// Seconds per instance and solver unless told otherwise.
const DEFAULT_LIMIT: f64 = 10.0;
const SCRIPT: &str = "benches/roadmap_scipy.py";
const REQUIREMENTS: &str = "benches/requirements-roadmap.txt";

/// One solver's answer on one instance.
#[derive(Clone)]
struct Row {
    instance: String,
    candidates: usize,
    backend: String,
    seconds: f64,
    /// The fastest and slowest of the runs, when there were several.
    range: Option<(f64, f64)>,
    proven: bool,
    /// (bound - value) / value, as HiGHS reports its MIP gap; `None` without a plan.
    gap: Option<f64>,
    /// Value of the plan found, to the cent.
    objective: Option<Decimal>,
    /// The first rule the plan breaks (by `finance::roadmap::check`), or why there is none.
    problem: Option<String>,
}

impl Row {
    fn to_json(&self) -> Value {
        json!({
            "instance": self.instance, "candidates": self.candidates, "backend": self.backend,
            "seconds": self.seconds, "range": self.range.map(|(a, b)| [a, b]), "proven": self.proven, "gap": self.gap,
            "objective": self.objective.map(|d| d.to_string()), "problem": self.problem,
        })
    }

    fn from_json(v: &Value) -> Option<Self> {
        Some(Self {
            instance: v["instance"].as_str()?.to_string(),
            candidates: v["candidates"].as_u64()? as usize,
            backend: v["backend"].as_str()?.to_string(),
            seconds: v["seconds"].as_f64()?,
            range: v["range"].as_array().and_then(|r| Some((r.first()?.as_f64()?, r.get(1)?.as_f64()?))),
            proven: v["proven"].as_bool()?,
            gap: v["gap"].as_f64(),
            objective: v["objective"].as_str().and_then(|s| s.parse().ok()),
            problem: v["problem"].as_str().map(str::to_string),
        })
    }
}

struct Options {
    limit: f64,
    filters: Vec<String>,
    runs: usize,
    python: String,
}

fn options() -> Option<Options> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    // cargo bench passes --bench; cargo test (with --benches or --all-targets) does not.
    if !args.iter().any(|a| a == "--bench") {
        println!("roadmap: a benchmark; run it with `cargo bench --bench roadmap` (skipped)");
        return None;
    }
    let mut limit = std::env::var("ROADMAP_BENCH_LIMIT").ok().map(|s| s.parse().expect("ROADMAP_BENCH_LIMIT: seconds"));
    let mut filters = Vec::new();
    let mut runs = 1;
    let mut it = args.into_iter();
    while let Some(a) = it.next() {
        match a.as_str() {
            "--bench" => {}
            "--limit" => limit = Some(it.next().and_then(|s| s.parse().ok()).expect("--limit SECONDS")),
            "--runs" => runs = it.next().and_then(|s| s.parse().ok()).filter(|n| *n > 0).expect("--runs N (1 or more)"),
            other if other.starts_with("--") => {
                panic!("unknown option {other}: --limit SECONDS, --runs N, then instance names")
            }
            other => filters.push(other.to_string()),
        }
    }
    let python = std::env::var("PYTHON").unwrap_or_else(|_| "python3".to_string());
    Some(Options { limit: limit.unwrap_or(DEFAULT_LIMIT), filters, runs, python })
}

/// scipy and numpy versions, or how to install them.
fn python_ready(python: &str) -> Result<String, String> {
    let how = format!("install them with `{python} -m pip install -r {REQUIREMENTS}` (or set PYTHON)");
    let out = Command::new(python)
        .args(["-c", "import scipy, numpy; print(scipy.__version__, numpy.__version__)"])
        .output()
        .map_err(|e| format!("cannot run {python} ({e}): {how}"))?;
    if !out.status.success() {
        return Err(format!("{python} lacks scipy or numpy: {how}"));
    }
    let found = String::from_utf8_lossy(&out.stdout).trim().to_string();
    let pinned = std::fs::read_to_string(REQUIREMENTS).unwrap_or_default();
    let mut versions = found.split(' ');
    let (scipy, numpy) = (versions.next().unwrap_or(""), versions.next().unwrap_or(""));
    if !pinned.contains(&format!("scipy=={scipy}")) || !pinned.contains(&format!("numpy=={numpy}")) {
        eprintln!("warning: scipy {scipy} / numpy {numpy} differ from the pins in {REQUIREMENTS}: {how}");
    }
    Ok(format!("scipy {scipy}, numpy {numpy}"))
}

fn gap(value: Decimal, bound: Decimal) -> f64 {
    let (v, b) = (value.to_f64().unwrap_or(0.0), bound.to_f64().unwrap_or(0.0));
    if v.abs() > 0.0 {
        ((b - v) / v.abs()).max(0.0)
    } else if b > 0.0 {
        f64::INFINITY
    } else {
        0.0
    }
}

fn ours(name: &str, candidates: usize, inst: &Instance, limit: f64) -> Row {
    let t = Instant::now();
    let answer = roadmap(inst, Duration::from_secs_f64(limit));
    let seconds = t.elapsed().as_secs_f64();
    let mut row = Row {
        instance: name.to_string(),
        candidates,
        backend: BACKEND.to_string(),
        seconds,
        range: None,
        proven: false,
        gap: None,
        objective: None,
        problem: None,
    };
    match answer {
        Ok(r) => {
            let plan = &r.optimal;
            let starts: Vec<Option<i32>> = plan.placements.iter().map(Placement::start_month).collect();
            row.proven = plan.proven;
            row.gap = Some(if plan.proven { 0.0 } else { gap(plan.value, plan.bound) });
            row.objective = Some(plan.value);
            row.problem = check(inst, &starts).err().map(|rule| format!("breaks {rule:?}"));
        }
        Err(e) => row.problem = Some(format!("error: {e}")),
    }
    row
}

fn scipy(python: &str, name: &str, candidates: usize, inst: &Instance, path: &Path, limit: f64) -> Row {
    let mut row = Row {
        instance: name.to_string(),
        candidates,
        backend: "scipy milp".to_string(),
        seconds: f64::NAN,
        range: None,
        proven: false,
        gap: None,
        objective: None,
        problem: None,
    };
    let out = Command::new(python).arg(SCRIPT).arg("--time-limit").arg(limit.to_string()).arg(path).output();
    let out = match out {
        Ok(o) if o.status.success() => o,
        Ok(o) => {
            row.problem = Some(format!("{SCRIPT} failed: {}", String::from_utf8_lossy(&o.stderr).trim()));
            return row;
        }
        Err(e) => {
            row.problem = Some(format!("cannot run {python}: {e}"));
            return row;
        }
    };
    // HiGHS may print a line of its own on stdout: the answer is the last JSON line.
    let text = String::from_utf8_lossy(&out.stdout);
    let Some(v) = text.lines().rev().find_map(|l| serde_json::from_str::<Value>(l).ok()) else {
        row.problem = Some(format!("no answer from {SCRIPT}: {}", text.trim()));
        return row;
    };
    row.seconds = v["seconds"].as_f64().unwrap_or(f64::NAN);
    row.proven = v["proven"].as_bool().unwrap_or(false);
    row.gap = v["gap"].as_f64();
    row.objective = v["objective"].as_str().and_then(|s| s.parse().ok());
    // Cross-check the script's plan with the library's own rules and values.
    let starts: Vec<Option<u32>> =
        v["starts"].as_array().expect("starts").iter().map(|s| s.as_u64().map(|q| q as u32)).collect();
    let months: Vec<Option<i32>> =
        inst.zones.iter().zip(&starts).map(|(z, q)| z.committed_start.or(q.map(|q| 3 * q as i32))).collect();
    let ours_value: Decimal = starts.iter().enumerate().filter_map(|(i, q)| q.map(|q| value_at(inst, i, q))).sum();
    row.problem = match (v["check"].as_str(), check(inst, &months)) {
        (Some(p), _) => Some(format!("script's re-check: {p}")),
        (None, Err(rule)) => Some(format!("breaks {rule:?}")),
        (None, Ok(())) if row.objective.is_some_and(|o| o != ours_value) => {
            Some(format!("value by finance::roadmap::value_at: {ours_value}"))
        }
        _ => None,
    };
    row
}

fn state(r: &Row) -> String {
    match (r.proven, r.gap) {
        (true, _) => "proven".to_string(),
        (false, Some(g)) if g.is_finite() => format!("gap {:.2} %", 100.0 * g),
        (false, Some(_)) => "gap unbounded".to_string(),
        (false, None) => "no plan".to_string(),
    }
}

/// Whether a solver's value equals the reference's to the cent (when both are proven, they
/// must; otherwise it says which is ahead).
fn agreement(r: &Row, reference: Option<&Row>) -> String {
    let Some(reference) = reference else { return "—".to_string() };
    if r.backend == reference.backend {
        return "reference".to_string();
    }
    match (r.objective, reference.objective) {
        (Some(a), Some(b)) if a == b => "yes".to_string(),
        (Some(a), Some(b)) if r.proven && reference.proven => format!("**no**: {}", a - b),
        (Some(a), Some(b)) => format!("not both proven: {:+}", a - b),
        _ => "—".to_string(),
    }
}

fn table(rows: &[Row]) -> String {
    let mut s = String::from(
        "| instance | candidates | backend | seconds | proven or gap | objective | agrees with scipy to the cent |\n\
         |---|---|---|---|---|---|---|\n",
    );
    for r in rows {
        let reference = rows.iter().find(|o| o.instance == r.instance && o.backend == "scipy milp");
        let objective = r.objective.map_or("—".to_string(), money);
        let problem = r.problem.as_ref().map_or(String::new(), |p| format!(" ({p})"));
        let range = r.range.map_or(String::new(), |(a, b)| format!(" ({a:.2}–{b:.2})"));
        s += &format!(
            "| {} | {} | {} | {:.2}{} | {}{} | {} | {} |\n",
            r.instance,
            r.candidates,
            r.backend,
            r.seconds,
            range,
            state(r),
            problem,
            objective,
            agreement(r, reference)
        );
    }
    s
}

/// Money with thousands separators, to the cent.
fn money(d: Decimal) -> String {
    let text = format!("{:.2}", d.round_dp(2));
    let (int, frac) = text.split_once('.').unwrap_or((&text, "00"));
    let (sign, digits) = int.strip_prefix('-').map_or(("", int), |d| ("-", d));
    let mut grouped = String::new();
    for (i, c) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i) % 3 == 0 {
            grouped.push(',');
        }
        grouped.push(c);
    }
    format!("{sign}{grouped}.{frac}")
}

fn machine() -> String {
    let cores = std::thread::available_parallelism().map_or(0, |n| n.get());
    let cpu = std::fs::read_to_string("/proc/cpuinfo")
        .ok()
        .and_then(|t| {
            t.lines()
                .find(|l| l.starts_with("model name"))
                .map(|l| l.split(':').nth(1).unwrap_or("").trim().to_string())
        })
        .unwrap_or_else(|| "unknown CPU".to_string());
    format!("{cores} cores, {cpu}")
}

fn main() {
    let Some(opts) = options() else { return };
    let dir = PathBuf::from("target/roadmap-bench");
    std::fs::create_dir_all(&dir).expect("create target/roadmap-bench");
    let python = python_ready(&opts.python);
    if let Err(how) = &python {
        eprintln!("scipy side skipped: {how}");
    }
    println!(
        "roadmap benchmark: finance::roadmap with {BACKEND}; {}; time limit {} s; {}; {}\n",
        python.as_deref().unwrap_or("scipy not run"),
        opts.limit,
        if opts.runs > 1 { format!("median of {} runs each", opts.runs) } else { "one run each".to_string() },
        machine()
    );
    let mut mine = Vec::new();
    let mut theirs = Vec::new();
    for g in instances::all() {
        if !opts.filters.is_empty() && !opts.filters.iter().any(|f| g.name.contains(f.as_str())) {
            continue;
        }
        let path = dir.join(format!("{}.json", g.name));
        let text = serde_json::to_string_pretty(&instances::to_json(&g)).expect("JSON");
        std::fs::write(&path, text + "\n").expect("write the instance");
        let (mut a, mut b) = (Vec::new(), Vec::new());
        for _ in 0..opts.runs {
            let row = ours(&g.name, g.candidates, &g.instance, opts.limit);
            eprintln!("{}: {BACKEND} {:.2} s, {}", g.name, row.seconds, state(&row));
            a.push(row);
            if python.is_ok() {
                let row = scipy(&opts.python, &g.name, g.candidates, &g.instance, &path, opts.limit);
                eprintln!("{}: scipy milp {:.2} s, {}", g.name, row.seconds, state(&row));
                b.push(row);
            }
        }
        mine.extend(median(a));
        theirs.extend(median(b));
    }
    let save = |name: &str, rows: &[Row]| {
        let doc = json!({"limit": opts.limit, "rows": rows.iter().map(Row::to_json).collect::<Vec<_>>()});
        std::fs::write(dir.join(format!("results-{name}.json")), doc.to_string()).expect("write the results");
    };
    save(BACKEND, &mine);
    if !theirs.is_empty() {
        save("scipy", &theirs);
    }
    let order: Vec<String> = mine.iter().map(|r| r.instance.clone()).collect();
    let mut rows: Vec<Row> = mine.into_iter().chain(theirs).collect();
    sort(&mut rows, &order);
    println!("{}", table(&rows));
    // With the other backend's last run at the same limit on the same instances: all three.
    let other = if BACKEND == "highs" { "microlp" } else { "highs" };
    let earlier = std::fs::read_to_string(dir.join(format!("results-{other}.json")))
        .ok()
        .and_then(|t| serde_json::from_str::<Value>(&t).ok())
        .filter(|v| v["limit"].as_f64() == Some(opts.limit));
    if let Some(doc) = earlier {
        let before = rows.len();
        let found = doc["rows"].as_array().into_iter().flatten().filter_map(Row::from_json);
        rows.extend(found.filter(|e| order.contains(&e.instance)));
        if rows.len() > before {
            sort(&mut rows, &order);
            println!("With the last {other} run (target/roadmap-bench/results-{other}.json):\n\n{}", table(&rows));
        }
    }
}

/// The run of median time (of an even number, the faster middle one), with the range of all.
fn median(mut runs: Vec<Row>) -> Option<Row> {
    runs.sort_by(|x, y| x.seconds.total_cmp(&y.seconds));
    let range = (runs.len() > 1).then(|| (runs[0].seconds, runs[runs.len() - 1].seconds));
    let mut row = runs.get((runs.len().max(1) - 1) / 2)?.clone();
    row.range = range;
    Some(row)
}

/// Instances in the run's order; per instance microlp, highs, then scipy.
fn sort(rows: &mut [Row], order: &[String]) {
    let rank = |b: &str| ["microlp", "highs", "scipy milp"].iter().position(|x| *x == b).unwrap_or(3);
    rows.sort_by_key(|r| (order.iter().position(|o| *o == r.instance), rank(&r.backend)));
}
