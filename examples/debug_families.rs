use spurhound::scan::{ReadOptions, read_scan_file};
fn main() {
    let scan = read_scan_file(std::path::Path::new("fixtures/demo/dut.csv"), &ReadOptions::default()).unwrap().scan;
    let floor = spurhound::floor::estimate_floor(&scan, &Default::default());
    let peaks = spurhound::peaks::find_peaks(&scan, &floor, &Default::default());
    for p in peaks.iter().take(15) { println!("{:.0} {:.1} w {:.0} sig {:.1}", p.freq_hz, p.level_dbuv, p.width_hz, p.significance_db); }
    let lines: Vec<spurhound::families::sieve::Line> = peaks.iter().map(|p| spurhound::families::sieve::Line { freq_hz: p.freq_hz, sigma_hz: 700.0, weight: 1.5 }).collect();
    let s = spurhound::families::sieve::Sieve { lines: &lines, free: vec![true; lines.len()], min_fundamental_hz: 20e3, occupied: &[], params: Default::default() };
    let c = s.score(65e3, 5.0, spurhound::families::sieve::Pattern::All);
    println!("65k: hits {} misses {} value {}", c.hits.len(), c.misses, c.value);
    let b = s.best();
    println!("{:?}", b.map(|c| (c.fundamental_hz, c.hits.len(), c.misses, c.value)));
}
