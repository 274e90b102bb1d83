//! Large components: the Lagrangian bound's plans, and the same bytes on
//! one thread and on two, in one process and in two.

use super::*;

/// A component past the size of one LP (8,000 options) gets the
/// Lagrangian bound and a search started from its rounding: the plan
/// passes the verifier, is worth at least greedy, stays under its bound,
/// finishes its work budget rather than the clock, and comes out the same
/// twice.
#[test]
fn a_component_past_one_lps_size_plans_verified_from_the_lagrangian_bound() {
    let p = keyed_year();
    let request = PlanRequest::default();
    let inst = Instance::new(&p, &request);
    let biggest = components(&inst)
        .iter()
        .map(|c| c.iter().map(|&e| inst.options[e].len()).sum::<usize>())
        .max()
        .unwrap_or(0);
    assert!(
        biggest > 8000,
        "{biggest} options: the LP path, not the Lagrangian"
    );
    let first = plan(&p, &request);
    if let Err(v) = verify(&p, &request, &first) {
        panic!("verifier: {v:#?}");
    }
    let s = &first.solver;
    assert!(!s.cut_short);
    assert!(s.value >= first.greedy_value - 1e-9);
    assert!(s.value <= s.bound + 1e-9 * s.bound);
    assert_eq!(untimed(first.clone()), untimed(plan(&p, &request)));
}

/// Runs `f` on a rayon pool of `threads` threads.
pub(crate) fn on_threads<T: Send>(threads: usize, f: impl FnOnce() -> T + Send) -> T {
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .expect("a thread pool")
        .install(f)
}

/// Components are bounded and searched on the rayon pool, and the
/// Lagrangian bound prices a large component's tests there; the results
/// are gathered in a fixed order, so a portfolio of eight components, and
/// one whose component is past 8,000 options, each give the same plan,
/// byte for byte in its JSON, on one thread and on two.
#[test]
fn the_plan_is_the_same_bytes_on_one_thread_and_on_two() {
    let mut several = synthetic::portfolio(&synthetic::Spec::quarter(40, 8, 3));
    // Links only within a pool, so each pool is a component of its own.
    let pool_of: Vec<usize> = several.experiments.iter().map(|e| e.pools[0]).collect();
    for (i, e) in several.experiments.iter_mut().enumerate() {
        e.after.retain(|a| pool_of[a.experiment] == pool_of[i]);
        e.not_with.retain(|&o| pool_of[o] == pool_of[i]);
    }
    several.after_order = after_order(&several.experiments).expect("no cycle");
    let large = keyed_year();
    let request = PlanRequest::default();
    for (p, lagrangian) in [(&several, false), (&large, true)] {
        let inst = Instance::new(p, &request);
        let comps = components(&inst);
        let biggest = comps
            .iter()
            .map(|c| options_of(&inst, c))
            .fold(0.0, f64::max);
        assert!(comps.len() >= if lagrangian { 1 } else { 8 }, "{comps:?}");
        assert_eq!(biggest > 8000.0, lagrangian, "{biggest} options");
        let bytes = |threads: usize| {
            let plan = on_threads(threads, || untimed(plan(p, &request)));
            assert!(!plan.solver.cut_short);
            serde_json::to_vec(&plan).expect("a plan serialises")
        };
        let one = bytes(1);
        assert!(one == bytes(2), "the plans differ on one thread and two");
    }
}

/// The portfolio the process test plans: 70 tests on 4 pools over a
/// year with every key (tests on several pools, ramps, pairs apart,
/// eligibility, holdouts), whose one component is past 8,000 options and
/// gets the Lagrangian bound.
fn keyed_year() -> Portfolio {
    let spec = synthetic::Spec {
        tests: 70,
        pools: 4,
        weeks: 52,
        seed: 1,
    };
    let mut p = synthetic::with_calendar_keys(synthetic::portfolio(&spec), 1);
    synthetic::with_keys(&mut p, 1);
    p
}

/// The child of the test below: plans [`keyed_year`] and writes the
/// plan's JSON to the file `SLUICE_THREADS_CHILD` names; without it (an
/// ordinary `cargo test`) it does nothing.
#[test]
fn threads_child_writes_its_plan() {
    let Ok(out) = std::env::var("SLUICE_THREADS_CHILD") else {
        return;
    };
    let plan = untimed(plan(&keyed_year(), &PlanRequest::default()));
    assert!(!plan.solver.cut_short);
    std::fs::write(out, serde_json::to_vec(&plan).expect("a plan serialises"))
        .expect("the child writes its plan");
}

/// Two processes, one with `RAYON_NUM_THREADS=1` and one with `=2`, plan
/// the same synthetic portfolio (a component past 8,000 options, so the
/// Lagrangian bound's parallel pricing runs) and write the same bytes:
/// each is this test binary again, running only the child above.
#[test]
fn separate_processes_on_one_thread_and_two_write_the_same_plan() {
    let p = keyed_year();
    let inst = Instance::new(&p, &PlanRequest::default());
    let biggest = components(&inst)
        .iter()
        .map(|c| options_of(&inst, c))
        .fold(0.0, f64::max);
    assert!(biggest > 8000.0, "{biggest} options");
    let dir = std::env::temp_dir().join(format!("sluice-threads-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("a scratch directory");
    let bytes = |threads: &str| {
        let out = dir.join(format!("plan-{threads}.json"));
        let status = std::process::Command::new(std::env::current_exe().expect("this test binary"))
            .args([
                "--exact",
                "schedule::tests::scale::threads_child_writes_its_plan",
                "--test-threads",
                "1",
                "--quiet",
            ])
            .env("SLUICE_THREADS_CHILD", &out)
            .env("RAYON_NUM_THREADS", threads)
            .stdout(std::process::Stdio::null())
            .status()
            .expect("the child runs");
        assert!(status.success(), "the child on {threads} thread(s) failed");
        std::fs::read(&out).expect("the child wrote its plan")
    };
    let (one, two) = (bytes("1"), bytes("2"));
    std::fs::remove_dir_all(&dir).ok();
    assert!(one.len() > 1000);
    assert!(one == two, "the plans differ on one thread and two");
}
