//! Claims as leases: PID reuse, claims naming the runner itself, other hosts' leases, stopped
//! runners, racing takeovers after kill -9, and SIGTERM.

use crate::util::{Work, counts, numbers, stderr};
use kiln::store::table;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

fn slow() -> String {
    crate::util::slow_spec("lease")
}

fn quick() -> String {
    slow().replace("sweeps = 2500", "sweeps = 50")
}

fn reference(w: &Work, spec: &Path) -> Vec<u8> {
    w.run_json(
        spec,
        &["--results", "reference", "--cache", "reference-cache"],
    );
    numbers(&w.path().join("reference/lease/cells.parquet"))
}

/// The distinct cell keys of a spec (hex).
fn keys(spec: &Path) -> Vec<String> {
    let s = kiln::spec::load(spec).unwrap();
    let plan = kiln::spec::plan::expand(&s);
    let mut k: Vec<String> = plan.distinct().map(|c| c.key.hex()).collect();
    k.sort();
    k
}

fn claim_path(cache: &Path, key: &str, generation: u64) -> PathBuf {
    cache
        .join("claims")
        .join(&key[..2])
        .join(format!("{key}.{generation}.claim"))
}

fn claim_files(cache: &Path) -> Vec<PathBuf> {
    let mut out = Vec::new();
    if let Ok(shards) = std::fs::read_dir(cache.join("claims")) {
        for s in shards.flatten() {
            if let Ok(files) = std::fs::read_dir(s.path()) {
                out.extend(
                    files
                        .flatten()
                        .map(|e| e.path())
                        .filter(|p| p.to_string_lossy().ends_with(".claim")),
                );
            }
        }
    }
    out
}

fn boot_id() -> String {
    std::fs::read_to_string("/proc/sys/kernel/random/boot_id")
        .unwrap()
        .trim()
        .to_string()
}

fn line(host: &str, pid: u32, start: &str, lease: f64) -> String {
    format!(
        "kiln-claim 2 host={host} pid={pid} start={start} boot={} nonce=0123456789abcdef lease={lease} owner=test\n",
        boot_id()
    )
}

fn spawn_run(w: &Work, spec: &Path, extra: &[&str]) -> Child {
    Command::new(env!("CARGO_BIN_EXE_kiln"))
        .args(["run", spec.to_str().unwrap(), "--json"])
        .args(extra)
        .current_dir(w.path())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap()
}

fn summary(o: &std::process::Output) -> serde_json::Value {
    serde_json::from_slice(&o.stdout)
        .unwrap_or_else(|e| panic!("{e}: {}\n{}", stderr(o), String::from_utf8_lossy(&o.stdout)))
}

fn signal(child: &Child, sig: &str) {
    let st = Command::new("kill")
        .args([sig, &child.id().to_string()])
        .status()
        .unwrap();
    assert!(st.success());
}

/// Waits for a child, failing (after killing it) if it takes longer than `limit`: a liveness
/// check (a runner stuck behind a claim never ends), not a timing measurement.
fn wait_within(mut child: Child, limit: Duration) -> std::process::Output {
    let t = Instant::now();
    while child.try_wait().unwrap().is_none() {
        if t.elapsed() > limit {
            let _ = child.kill();
            let o = child.wait_with_output().unwrap();
            panic!(
                "still running after {limit:?} (stuck behind a claim?): {}",
                stderr(&o)
            );
        }
        std::thread::sleep(Duration::from_millis(20));
    }
    child.wait_with_output().unwrap()
}

/// PID reuse: every cell is claimed in the name of a live process that is not kiln (a
/// `sleep`), whose start time differs from the one the claim records. The run takes every
/// claim over at once, says why, and leaves no claim behind.
#[test]
fn claims_naming_a_reused_pid_are_taken_over() {
    let w = Work::new();
    let spec = w.spec("s.toml", &quick());
    let mut sleeper = Command::new("sleep").arg("60").spawn().unwrap();
    let cache = w.path().join("results/.cache");
    let host = kiln::store::this_host();
    for k in keys(&spec) {
        let p = claim_path(&cache, &k, 0);
        std::fs::create_dir_all(p.parent().unwrap()).unwrap();
        std::fs::write(&p, line(host, sleeper.id(), "1", 600.0)).unwrap();
    }
    let o = wait_within(spawn_run(&w, &spec, &[]), Duration::from_secs(120));
    sleeper.kill().unwrap();
    sleeper.wait().unwrap();
    assert!(o.status.success(), "{}", stderr(&o));
    let v = summary(&o);
    assert_eq!(counts(&v).0, v["cells"]["total"].as_u64().unwrap());
    let took = v["takeovers"].as_array().unwrap();
    assert_eq!(took.len(), keys(&spec).len(), "{took:?}");
    assert!(
        took[0]
            .as_str()
            .unwrap()
            .contains("that PID now belongs to another process"),
        "{took:?}"
    );
    assert!(claim_files(&cache).is_empty());
}

/// A claim written by a shell that then exec's kiln names the runner's own PID and start
/// time (exec keeps both) but not its nonce: the runner takes it over instead of waiting for
/// itself.
#[test]
fn a_claim_naming_the_runner_itself_is_taken_over() {
    let w = Work::new();
    let spec = w.spec("s.toml", &quick());
    let cache = w.path().join("results/.cache");
    let paths: Vec<String> = keys(&spec)
        .iter()
        .map(|k| claim_path(&cache, k, 0).display().to_string())
        .collect();
    std::fs::write(w.path().join("claims.txt"), paths.join("\n") + "\n").unwrap();
    let script = format!(
        r#"start=$(sed 's/.*) //' /proc/$$/stat | cut -d' ' -f20)
while read -r p; do
  mkdir -p "$(dirname "$p")"
  printf 'kiln-claim 2 host=%s pid=%s start=%s boot=%s nonce=feedfeedfeedfeed lease=600 owner=shell\n' \
    "{host}" "$$" "$start" "$(cat /proc/sys/kernel/random/boot_id)" > "$p"
done < claims.txt
exec "{kiln}" run s.toml --json"#,
        host = kiln::store::this_host(),
        kiln = env!("CARGO_BIN_EXE_kiln"),
    );
    let child = Command::new("sh")
        .args(["-c", &script])
        .current_dir(w.path())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let o = wait_within(child, Duration::from_secs(120));
    assert!(o.status.success(), "{}", stderr(&o));
    let v = summary(&o);
    let took = v["takeovers"].as_array().unwrap();
    assert_eq!(took.len(), paths.len(), "{took:?}");
    assert!(
        took[0]
            .as_str()
            .unwrap()
            .contains("names this process's PID but was not written by it"),
        "{took:?}"
    );
    assert!(claim_files(&cache).is_empty());
}

/// Claims of another host: respected while their lease runs (`kiln status` counts them as
/// running), taken over once it has expired, by a runner on any host.
#[test]
fn leases_of_other_hosts_expire() {
    let w = Work::new();
    let spec = w.spec("s.toml", &quick());
    let cache = w.path().join("results/.cache");
    let ks = keys(&spec);
    // Every cell: a lease of 10 minutes last renewed an hour ago. One cell: a live 3 s lease.
    let hour_ago = std::time::SystemTime::now() - Duration::from_secs(3600);
    for k in &ks[1..] {
        let p = claim_path(&cache, k, 0);
        std::fs::create_dir_all(p.parent().unwrap()).unwrap();
        std::fs::write(&p, line("node-elsewhere", 4242, "77", 600.0)).unwrap();
        let f = std::fs::File::options().write(true).open(&p).unwrap();
        f.set_modified(hour_ago).unwrap();
    }
    let live = claim_path(&cache, &ks[0], 0);
    std::fs::create_dir_all(live.parent().unwrap()).unwrap();
    std::fs::write(&live, line("node-elsewhere", 4242, "77", 3.0)).unwrap();
    let o = w.kiln(&["status", "s.toml", "--json"]);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["all"]["running"], 1, "{v}");
    assert_eq!(v["all"]["missing"], ks.len() as u64 - 1, "{v}");
    let o = wait_within(spawn_run(&w, &spec, &[]), Duration::from_secs(120));
    assert!(o.status.success(), "{}", stderr(&o));
    let v = summary(&o);
    assert_eq!(counts(&v).0, ks.len() as u64);
    let took: Vec<&str> = v["takeovers"]
        .as_array()
        .unwrap()
        .iter()
        .map(|t| t.as_str().unwrap())
        .collect();
    assert_eq!(took.len(), ks.len(), "{took:?}");
    assert!(
        took.iter()
            .all(|t| t.contains("lease of node-elsewhere pid 4242"))
    );
    assert!(claim_files(&cache).is_empty());
}

/// A runner stopped with SIGSTOP mid-run holds claims it no longer renews: a second runner
/// takes them over once their 1 s lease expires and finishes the plan; the stopped runner,
/// continued, finishes too; both tables equal an undisturbed run's.
#[test]
fn a_stopped_runner_loses_its_claims() {
    let w = Work::new();
    let spec = w.spec("s.toml", &slow());
    let want = reference(&w, &spec);
    let a = spawn_run(
        &w,
        &spec,
        &["--lease", "1", "--jobs", "2", "--results", "a"],
    );
    std::thread::sleep(Duration::from_millis(500));
    signal(&a, "-STOP");
    let held = claim_files(&w.path().join("a/.cache"));
    let b = spawn_run(
        &w,
        &spec,
        &["--lease", "1", "--results", "b", "--cache", "a/.cache"],
    );
    let ob = wait_within(b, Duration::from_secs(120));
    signal(&a, "-CONT");
    let oa = wait_within(a, Duration::from_secs(120));
    assert!(ob.status.success(), "{}", stderr(&ob));
    assert!(oa.status.success(), "{}", stderr(&oa));
    let vb = summary(&ob);
    assert!(
        !held.is_empty(),
        "the stop landed when the runner held no claim"
    );
    assert!(
        !vb["takeovers"].as_array().unwrap().is_empty(),
        "{}",
        stderr(&ob)
    );
    assert_eq!(numbers(&w.path().join("a/lease/cells.parquet")), want);
    assert_eq!(numbers(&w.path().join("b/lease/cells.parquet")), want);
}

/// Four runners are killed (kill -9) mid-run, leaving claims of dead processes; four more
/// resume at once and race to take those claims over. Each cell is computed exactly once:
/// the resumers' computed counts add up to the cells missing before they started. Repeated
/// `KILN_RACE_REPETITIONS` times (default 4 in the suite; the reliability report runs 100).
#[test]
fn four_runners_resuming_after_kill_9_compute_each_cell_once() {
    let reps: usize = std::env::var("KILN_RACE_REPETITIONS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(4);
    let w = Work::new();
    let spec = w.spec("s.toml", &slow());
    let want = reference(&w, &spec);
    let mut stale_seen = 0;
    for rep in 0..reps {
        let results = format!("r{rep}");
        let cache = w.path().join(&results).join(".cache");
        let first: Vec<Child> = (0..4)
            .map(|_| spawn_run(&w, &spec, &["--jobs", "1", "--results", &results]))
            .collect();
        std::thread::sleep(Duration::from_millis(150 + 97 * (rep as u64 % 7)));
        for mut c in first {
            c.kill().unwrap();
            c.wait().unwrap();
        }
        stale_seen += claim_files(&cache).len();
        let o = w.kiln(&["status", "s.toml", "--json", "--results", &results]);
        let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
        let missing = v["all"]["cells"].as_u64().unwrap() - v["all"]["done"].as_u64().unwrap();
        let resumers: Vec<Child> = (0..4)
            .map(|_| spawn_run(&w, &spec, &["--jobs", "1", "--results", &results]))
            .collect();
        let computed: u64 = resumers
            .into_iter()
            .map(|c| {
                let o = wait_within(c, Duration::from_secs(120));
                assert!(o.status.success(), "{}", stderr(&o));
                counts(&summary(&o)).0
            })
            .sum();
        assert_eq!(
            computed, missing,
            "repetition {rep}: {computed} computations for {missing} missing cells"
        );
        assert_eq!(
            numbers(&w.path().join(&results).join("lease/cells.parquet")),
            want
        );
        assert!(claim_files(&cache).is_empty());
    }
    assert!(stale_seen > 0, "no kill left a claim behind");
}

/// SIGTERM mid-run: the cells in flight finish, the claims are released, the table of what
/// is done is written, exit status 143; the resumed run completes the same table.
#[test]
fn sigterm_writes_what_is_done_and_resumes() {
    let w = Work::new();
    let spec = w.spec("s.toml", &slow());
    let want = reference(&w, &spec);
    let child = spawn_run(&w, &spec, &[]);
    std::thread::sleep(Duration::from_millis(400));
    signal(&child, "-TERM");
    let o = wait_within(child, Duration::from_secs(60));
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(143), "{err}");
    assert!(err.contains("SIGTERM"), "{err}");
    let v = summary(&o);
    let done = v["rows"].as_u64().unwrap();
    assert!(
        done < v["cells"]["total"].as_u64().unwrap(),
        "finished first"
    );
    assert_eq!(
        table::read(&w.path().join("results/lease/cells.parquet"))
            .unwrap()
            .height() as u64,
        done
    );
    assert!(claim_files(&w.path().join("results/.cache")).is_empty());
    let rest = w.run_json(&spec, &[]);
    assert_eq!(counts(&rest).1, done, "resume recomputed finished cells");
    assert_eq!(numbers(&w.path().join("results/lease/cells.parquet")), want);
}

/// A spec of one long cell: `model` (the lines of `[model]`), size `n`, `algorithm` (the lines
/// of `[[algorithm]]`).
fn long_cell(w: &Work, model: &str, n: u64, algorithm: &str) -> PathBuf {
    w.spec(
        "s.toml",
        &format!(
            "[experiment]\nname = \"long\"\n[model]\n{model}\n[sweep]\nsizes = [{n}]\nseeds = 1\n[[algorithm]]\n{algorithm}\n"
        ),
    )
}

/// Waits (up to 30 s) until the run holds a claim: its cell is in flight.
fn wait_for_claim(cache: &Path) {
    let t = Instant::now();
    while claim_files(cache).is_empty() && t.elapsed() < Duration::from_secs(30) {
        std::thread::sleep(Duration::from_millis(20));
    }
}

/// The stop was clean: no claim, no record, an empty table and a manifest counting the cell
/// as skipped.
fn nothing_recorded(w: &Work) {
    let cache = w.path().join("results/.cache");
    assert!(claim_files(&cache).is_empty());
    let records: Vec<_> = std::fs::read_dir(cache.join("records"))
        .map(|d| d.flatten().collect())
        .unwrap_or_default();
    assert!(records.is_empty(), "{records:?}");
    let df = table::read(&w.path().join("results/long/cells.parquet")).unwrap();
    assert_eq!(df.height(), 0);
    let m = std::fs::read_to_string(w.path().join("results/long/manifest.toml")).unwrap();
    assert!(m.contains("skipped = 1"), "{m}");
}

/// Ctrl-C while a cell runs that its own pace projects far past the grace (10⁷ sweeps of
/// annealing at n = 1500; the grace is 60 s): the cell leaves at its next sweep instead of
/// using the grace, says where it was, records nothing, releases its claim; exit status 130.
/// The 40 s limit is a liveness check: without the stop the run would last until the grace
/// ended (60 s) and then be abandoned.
#[test]
fn ctrl_c_stops_a_long_cell_at_its_next_sweep() {
    let w = Work::new();
    let spec = long_cell(
        &w,
        "family = \"sk\"",
        1500,
        "kind = \"anneal\"\nsweeps = 10000000",
    );
    let child = spawn_run(&w, &spec, &["--grace", "60"]);
    wait_for_claim(&w.path().join("results/.cache"));
    std::thread::sleep(Duration::from_millis(300));
    signal(&child, "-INT");
    let o = wait_within(child, Duration::from_secs(40));
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(130), "{err}");
    assert!(err.contains("left at sweep"), "{err}");
    assert!(err.contains("nothing of it is recorded"), "{err}");
    assert!(!err.contains("abandoned"), "{err}");
    let v = summary(&o);
    assert_eq!(v["interrupted"], true);
    let stopped = v["stopped"].as_array().unwrap();
    assert_eq!(stopped.len(), 1, "{v}");
    assert!(stopped[0].as_str().unwrap().contains("of 10000000"), "{v}");
    nothing_recorded(&w);
}

/// SIGTERM while a cell computes that reports no steps to stop at (exhaustive search over the
/// 2²⁹ state pairs of the pure 3-spin cube at n = 30, measured over a minute), with a grace of
/// 0.3 s: after the grace and the wait for a step boundary (10 s) the cell is abandoned, its
/// claim released, the (empty) table and the manifest written, exit status 143.
#[test]
fn sigterm_abandons_a_cell_without_steps_after_the_grace() {
    let w = Work::new();
    let spec = long_cell(
        &w,
        "family = \"cube\"\nxi = { 3 = 0.5 }",
        30,
        "kind = \"exhaustive\"",
    );
    let child = spawn_run(&w, &spec, &["--grace", "0.3"]);
    wait_for_claim(&w.path().join("results/.cache"));
    signal(&child, "-TERM");
    let o = wait_within(child, Duration::from_secs(40));
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(143), "{err}");
    assert!(err.contains("abandoned"), "{err}");
    nothing_recorded(&w);
}
