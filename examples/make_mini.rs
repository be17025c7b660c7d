//! Writes the small bundled example study `examples/mini/fixes.csv`.
//!
//! An invented scenario: three synthetic animals ("brine-01" … "brine-03") around the
//! fictional Brinevik Sound, simulated as correlated random walks with a fixed seed.
//! brine-01 carries a GPS tag (hourly fixes), brine-02 an Argos tag (irregular times,
//! classes 3 … B with class-dependent scatter), brine-03 a Fastloc-GPS tag with a two-day
//! gap. A handful of faulty rows are planted so that `cairn check` has something to report:
//! an Argos Z fix, a duplicate timestamp, an unparseable time, a latitude out of range, an
//! empty id and a far-off spike. Run: `cargo run --example make_mini`.

use std::fmt::Write as _;

/// A small, fixed pseudo-random generator (64-bit LCG, Knuth's MMIX constants) so the
/// file is identical on every machine without a dependency.
struct Lcg(u64);
impl Lcg {
    fn uniform(&mut self) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        ((self.0 >> 11) as f64) / ((1u64 << 53) as f64)
    }
    fn normal(&mut self) -> f64 {
        // Box–Muller.
        let u = self.uniform().max(1e-300);
        let v = self.uniform();
        (-2.0 * u.ln()).sqrt() * (std::f64::consts::TAU * v).cos()
    }
}

fn stamp(start: i64, s: i64) -> String {
    let t = start + s;
    let days = t.div_euclid(86_400);
    let rem = t.rem_euclid(86_400);
    // Civil date from days since 1970-01-01 (Howard Hinnant's algorithm).
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = yoe + era * 400 + i64::from(m <= 2);
    format!(
        "{y:04}-{m:02}-{d:02} {:02}:{:02}:{:02}",
        rem / 3600,
        (rem / 60) % 60,
        rem % 60
    )
}

fn main() {
    let mut rng = Lcg(20_260_401);
    let start = 1_777_593_600; // 2026-05-01 00:00:00 UTC
    let mut out = String::from("animal,time,lon,lat,lc,tag\n");
    let (lon0, lat0): (f64, f64) = (17.35, 69.42);
    let m_per_deg_lat = 111_500.0;
    let m_per_deg_lon = m_per_deg_lat * lat0.to_radians().cos();
    for (a, tag) in ["GPS", "Argos", "Fastloc"].iter().enumerate() {
        let id = format!("brine-0{}", a + 1);
        let (mut x, mut y, mut heading) = (a as f64 * 3000.0, -(a as f64) * 2000.0, 0.0f64);
        let mut t = 0i64;
        let mut k = 0;
        while t < 10 * 86_400 {
            let dt = match *tag {
                "GPS" => 3600,
                "Argos" => 1800 + (rng.uniform() * 9000.0) as i64,
                _ => 2400 + (rng.uniform() * 4000.0) as i64,
            };
            t += dt;
            if *tag == "Fastloc" && (4 * 86_400..6 * 86_400).contains(&t) {
                continue; // the tag was dry-docked: a two-day gap
            }
            heading += 0.6 * rng.normal();
            let speed = 0.3 + 0.5 * rng.uniform();
            x += speed * dt as f64 * heading.cos();
            y += speed * dt as f64 * heading.sin();
            let (lc, err) = if *tag == "Argos" {
                let r = rng.uniform();
                let (c, e) = match r {
                    r if r < 0.15 => ("3", 250.0),
                    r if r < 0.30 => ("2", 500.0),
                    r if r < 0.45 => ("1", 1000.0),
                    r if r < 0.60 => ("0", 2500.0),
                    r if r < 0.80 => ("A", 1500.0),
                    _ => ("B", 3000.0),
                };
                (c, e)
            } else {
                ("", 15.0)
            };
            let ex = x + err * rng.normal();
            let ey = y + err * rng.normal();
            let lon = lon0 + ex / m_per_deg_lon;
            let lat = lat0 + ey / m_per_deg_lat;
            k += 1;
            let _ = writeln!(out, "{id},{},{lon:.6},{lat:.6},{lc},{tag}", stamp(start, t));
            if *tag == "Argos" && k == 20 {
                // A duplicate timestamp at a worse class, and a far-off spike.
                let _ = writeln!(
                    out,
                    "{id},{},{:.6},{lat:.6},B,{tag}",
                    stamp(start, t),
                    lon + 0.01
                );
                let _ = writeln!(
                    out,
                    "{id},{},{:.6},{:.6},A,{tag}",
                    stamp(start, t + 600),
                    lon + 0.9,
                    lat + 0.3
                );
            }
            if *tag == "Argos" && k == 30 {
                let _ = writeln!(
                    out,
                    "{id},{},{lon:.6},{lat:.6},Z,{tag}",
                    stamp(start, t + 300)
                );
            }
        }
    }
    out.push_str("brine-01,2026-05-03 25:00:00,17.40,69.40,,GPS\n");
    out.push_str("brine-03,2026-05-03 12:00:00,17.40,96.40,,Fastloc\n");
    out.push_str(",2026-05-03 12:00:00,17.40,69.40,,GPS\n");
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("examples/mini");
    std::fs::create_dir_all(&dir).expect("create examples/mini");
    std::fs::write(dir.join("fixes.csv"), out).expect("write fixes.csv");
    println!("wrote {}", dir.join("fixes.csv").display());
}
