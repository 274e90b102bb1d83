fn main() {
    let seed: u64 = std::env::args().nth(1).unwrap().parse().unwrap();
    let p =
        sluice::schedule::synthetic::portfolio(&sluice::schedule::synthetic::Spec::medium(seed));
    let r = sluice::schedule::PlanRequest::default();
    let t = std::time::Instant::now();
    println!(
        "{:?} {:?}",
        sluice::schedule::exact_value(&p, &r, 120.0),
        t.elapsed()
    );
}
