//! Shared by the geo and covariates benches: a seeded generator, the machine load, and the
//! synthetic 6-class landscape both annotate against.

/// xorshift64* (Vigna 2016), seeded; uniform in [0, 1).
pub struct Rng(pub u64);
impl Rng {
    pub fn next(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        (self.0.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11) as f64 / (1u64 << 53) as f64
    }
}

/// The 1-, 5- and 15-minute load averages, printed beside every bench figure.
pub fn load_average() -> String {
    std::fs::read_to_string("/proc/loadavg")
        .map(|s| s.split_whitespace().take(3).collect::<Vec<_>>().join(" "))
        .unwrap_or_else(|_| "unknown".into())
}

/// A patchy `side` × `side` landscape of classes 0–5 in 10-cell blocks plus noise, with
/// 1 % nodata cells (255), drawn from `rng`.
pub fn patchy_classes(side: usize, rng: &mut Rng) -> Vec<u8> {
    (0..side * side)
        .map(|i| {
            let (c, r) = (i % side, i / side);
            if rng.next() < 0.01 {
                255
            } else {
                (((c / 10) * 7 + (r / 10) * 3 + (rng.next() < 0.2) as usize) % 6) as u8
            }
        })
        .collect()
}
