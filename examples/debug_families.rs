use spurhound::families::sieve::{Pattern, Sieve};
use spurhound::scan::{ReadOptions, read_scan_file};
fn main() {
    let scan = read_scan_file(
        std::path::Path::new("fixtures/demo/dut.csv"),
        &ReadOptions::default(),
    )
    .unwrap()
    .scan;
    let floor = spurhound::floor::estimate_floor(&scan, &Default::default());
    let peaks = spurhound::peaks::find_peaks(&scan, &floor, &Default::default());
    let bw = spurhound::bandwidth::classify(&scan, &peaks);
    let humps = spurhound::bandwidth::find_humps(&scan, &floor, &peaks, &bw);
    let (lines, mut free, _w) = spurhound::families::offered_lines(&scan, &peaks, &humps);
    let fams =
        spurhound::families::find_families(&scan, &floor, &peaks, &humps, &[], &Default::default());
    for f in &fams {
        for m in &f.members {
            free[m.0] = false;
        }
    }
    let s = Sieve {
        lines: &lines,
        free,
        min_fundamental_hz: 20e3,
        occupied: &[],
        params: Default::default(),
    };
    for (i, l) in lines.iter().enumerate() {
        if l.width_hz > 40e3 {
            println!(
                "wide line {} {:.0} w {:.0} s {:.0} free {}",
                i, l.freq_hz, l.width_hz, l.sigma_hz, s.free[i]
            );
        }
    }
    let c0 = s.score(4e6, 2000.0, Pattern::OddOnly);
    println!(
        "initial hits {:?}",
        c0.hits
            .iter()
            .map(|h| (h.1, lines[h.0].freq_hz as i64, lines[h.0].sigma_hz as i64))
            .collect::<Vec<_>>()
    );
    let c = s.refined(4e6, 2000.0, Pattern::OddOnly);
    for k in 3..c.hits.len() {
        let mut d = c.clone();
        d.hits.truncate(k);
        println!("prefix {k} chance {:e}", s.chance(&d));
    }
    println!(
        "f0 {} hits {:?} misses {} value {} chance {}",
        c.fundamental_hz,
        c.hits
            .iter()
            .map(|h| (h.1, lines[h.0].freq_hz as i64, lines[h.0].sigma_hz as i64))
            .collect::<Vec<_>>(),
        c.misses,
        c.value,
        s.chance(&c)
    );
}
