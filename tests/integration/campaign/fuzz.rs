//! The seeded byte mutations of valid inputs: each mutated file is refused cleanly (exit 2,
//! one line naming the file, folder unchanged) or accepted when it is still valid.

use super::{valid_files, Campaign};

/// A seeded xorshift generator (Marsaglia 2003), so that every run mutates alike.
struct Rng(u64);

impl Rng {
    fn below(&mut self, n: usize) -> usize {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        (self.0 % n.max(1) as u64) as usize
    }
}

/// Bytes a mutation writes: digits, separators, signs, TOML and CSV syntax, control bytes.
const INTERESTING: &[u8] = b"0123456789,.-+eE\n\r\t \"#[]={}\x00\x0c\xff";

/// `bytes` with one to three random edits: a byte replaced, removed or inserted, a run
/// repeated, or the end cut off.
fn mutate(bytes: &[u8], rng: &mut Rng) -> Vec<u8> {
    let mut out = bytes.to_vec();
    for _ in 0..1 + rng.below(3) {
        let at = rng.below(out.len());
        let byte = INTERESTING[rng.below(INTERESTING.len())];
        match rng.below(5) {
            0 => out[at] = byte,
            1 => {
                out.remove(at);
            }
            2 => out.insert(at, byte),
            3 => {
                let end = (at + 1 + rng.below(20)).min(out.len());
                let run = out[at..end].to_vec();
                out.splice(at..at, run);
            }
            _ => out.truncate(at),
        }
        if out.is_empty() {
            out.push(byte);
        }
    }
    out
}

#[test]
fn seeded_mutations_of_valid_inputs_are_refused_cleanly_or_accepted() {
    let mut campaign = Campaign::new("campaign-fuzz", &[]);
    let fits = std::fs::read(campaign.dir.join("m.fits")).unwrap();
    let valid: Vec<(String, Vec<u8>)> = valid_files();
    let text = |name: &str| valid.iter().find(|f| f.0 == name).unwrap().1.clone();
    // (file as mutated, its valid bytes, command reading it, mutations)
    let targets: Vec<(&str, Vec<u8>, &str, usize)> = vec![
        (
            "fuzz-lens.csv",
            text("lens.csv"),
            "images --lenses FILE --points points.csv",
            70,
        ),
        (
            "fuzz-points.csv",
            text("points.csv"),
            "contour --s 1 --q 1e-3 --rho 0.01 --points FILE",
            50,
        ),
        (
            "fuzz-times.csv",
            text("times.csv"),
            "curve --map m.fits --t0 0 --u0 0.1 --te 20 --alpha 30 --times FILE",
            50,
        ),
        (
            "fuzz-spec.toml",
            text("lib.toml"),
            "library build FILE --check",
            80,
        ),
        (
            "fuzz-map.fits",
            fits,
            "curve --map FILE --t0 0 --u0 0.1 --te 20 --alpha 30 --time-range 0,1,5",
            70,
        ),
    ];
    let mut rng = Rng(0x9e37_79b9_7f4a_7c15);
    for (name, bytes, command, count) in targets {
        let args: Vec<String> = command
            .replace("FILE", name)
            .split(' ')
            .map(String::from)
            .collect();
        for _ in 0..count {
            let mutated = mutate(&bytes, &mut rng);
            campaign.put(name, &mutated);
            campaign.case(&args, &[name.to_string()], true);
        }
    }
    campaign.finish();
}
