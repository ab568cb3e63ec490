//! `linegrid voigt`: the Voigt function H(a, v) for pairs read from standard input or a file.

use std::hint::black_box;
use std::io::Read;
use std::path::PathBuf;
use std::time::Instant;

use clap::Args;
use serde_json::json;

use linegrid::opacity::voigt::{voigt_h, voigt_h_slice};

use super::{Failure, print_json};

#[derive(Args)]
#[command(
    after_help = "Input: one pair `a v` per line, separated by spaces, tabs or a comma; blank \
lines and lines starting with # are skipped. a >= 0 is the damping parameter Γ/(4π Δν_D), \
v = (ν − ν₀)/Δν_D.\n\
Output: one CSV line `a,v,H` per pair (17 significant digits, no header), H normalised to \
∫ H dv = √π.\n\n\
Examples:\n  printf '1e-3 2.5\\n0.5,0\\n' | linegrid voigt\n  linegrid voigt --input pairs.txt > h.csv\n  \
linegrid voigt --input pairs.txt --time"
)]
pub struct VoigtArgs {
    /// Read the pairs from FILE instead of standard input
    #[arg(long, value_name = "FILE")]
    input: Option<PathBuf>,
    /// Time the kernel instead of printing H: evaluate all pairs R times and print JSON
    /// {"evaluations", "seconds", "ns_per_evaluation", "kernel"} (reading and parsing excluded)
    #[arg(long)]
    time: bool,
    /// With --time: passes over the pairs (default: as many as take at least 0.5 s)
    #[arg(long, value_name = "R", requires = "time", value_parser = clap::value_parser!(u64).range(1..))]
    repeat: Option<u64>,
    /// With --time: call voigt_h once per pair instead of the block evaluator voigt_h_slice
    #[arg(long, requires = "time")]
    scalar: bool,
}

pub fn run(args: VoigtArgs) -> Result<(), Failure> {
    let (source, text) = match &args.input {
        Some(path) => {
            let text = std::fs::read_to_string(path).map_err(|e| {
                Failure::bad_input(anyhow::anyhow!(
                    "--input: cannot read '{}': {e}",
                    path.display()
                ))
            })?;
            (path.display().to_string(), text)
        }
        None => {
            let mut text = String::new();
            std::io::stdin().read_to_string(&mut text).map_err(|e| {
                Failure::bad_input(anyhow::anyhow!("cannot read standard input: {e}"))
            })?;
            ("standard input".to_string(), text)
        }
    };
    let (a, v) =
        parse_pairs(&text).map_err(|e| Failure::bad_input(anyhow::anyhow!("{source}, {e}")))?;
    if args.time {
        return time(&a, &v, args.repeat, args.scalar);
    }
    let mut h = vec![0.0; a.len()];
    voigt_h_slice(&a, &v, &mut h);
    let mut o = String::with_capacity(a.len() * 72);
    for ((a, v), h) in a.iter().zip(&v).zip(&h) {
        outln!(o, "{a:.16e},{v:.16e},{h:.16e}");
    }
    super::emit(&o)
}

/// The pairs of `text`, or a message naming the (1-based) line that is wrong.
fn parse_pairs(text: &str) -> Result<(Vec<f64>, Vec<f64>), String> {
    let (mut a, mut v) = (Vec::new(), Vec::new());
    for (n, line) in text.lines().enumerate() {
        let line = line.trim();
        if line.is_empty() || line.starts_with('#') {
            continue;
        }
        let fields: Vec<&str> = line
            .split(|c: char| c == ',' || c.is_whitespace())
            .filter(|f| !f.is_empty())
            .collect();
        let at = n + 1;
        let [fa, fv] = fields[..] else {
            return Err(format!(
                "line {at}: expected two numbers `a v`, found {} field(s) in '{line}'",
                fields.len()
            ));
        };
        let number = |name: &str, f: &str| -> Result<f64, String> {
            match f.parse::<f64>() {
                Ok(x) if x.is_nan() => Err(format!("line {at}: {name} is NaN")),
                Ok(x) => Ok(x),
                Err(_) => Err(format!("line {at}: {name} = '{f}' is not a number")),
            }
        };
        let (x, y) = (number("a", fa)?, number("v", fv)?);
        if x < 0.0 {
            return Err(format!(
                "line {at}: a = {fa} is negative (the damping parameter is >= 0)"
            ));
        }
        a.push(x);
        v.push(y);
    }
    Ok((a, v))
}

/// Evaluate every pair R times (R doubling from 1 until a batch takes ≥ 0.5 s unless given)
/// and report the last batch.
fn time(a: &[f64], v: &[f64], repeat: Option<u64>, scalar: bool) -> Result<(), Failure> {
    if a.is_empty() {
        return Err(Failure::bad_input(anyhow::anyhow!(
            "--time: no pairs in the input"
        )));
    }
    let mut out = vec![0.0; a.len()];
    let pass = |out: &mut [f64]| {
        if scalar {
            for ((o, &a), &v) in out.iter_mut().zip(black_box(a)).zip(black_box(v)) {
                *o = voigt_h(a, v);
            }
        } else {
            voigt_h_slice(black_box(a), black_box(v), out);
        }
        black_box(out);
    };
    pass(&mut out); // warm up (builds the series tables)
    let mut reps = repeat.unwrap_or(1);
    let seconds = loop {
        let start = Instant::now();
        for _ in 0..reps {
            pass(&mut out);
        }
        let seconds = start.elapsed().as_secs_f64();
        if repeat.is_some() || seconds >= 0.5 {
            break seconds;
        }
        reps *= 2;
    };
    let evaluations = a.len() as u64 * reps;
    print_json(&json!({
        "evaluations": evaluations,
        "seconds": seconds,
        "ns_per_evaluation": seconds * 1e9 / evaluations as f64,
        "kernel": if scalar { "voigt_h" } else { "voigt_h_slice" },
    }))
}

#[cfg(test)]
mod tests {
    use super::parse_pairs;

    #[test]
    fn parses_spaces_commas_comments_and_blank_lines() {
        let (a, v) = parse_pairs("# a v\n1e-3 2.5\n\n 0.5,0 \n0.1\t-3\n2 , 7\n").unwrap();
        assert_eq!(a.len(), 4);
        assert_eq!(
            a.iter().map(|x| x.to_bits()).collect::<Vec<_>>(),
            [1e-3, 0.5, 0.1, 2.0].map(f64::to_bits)
        );
        assert_eq!(
            v.iter().map(|x| x.to_bits()).collect::<Vec<_>>(),
            [2.5, 0.0, -3.0, 7.0].map(f64::to_bits)
        );
        assert!(parse_pairs("").unwrap().0.is_empty());
    }

    #[test]
    fn errors_name_the_line() {
        for (text, line, what) in [
            ("1 2\n1 x\n", "line 2", "not a number"),
            ("1 2\n\n3\n", "line 3", "found 1 field"),
            ("1 2 3\n", "line 1", "found 3 field"),
            ("1 2\n-0.5 1\n", "line 2", "negative"),
            ("NaN 1\n", "line 1", "a is NaN"),
            ("1 nan\n", "line 1", "v is NaN"),
        ] {
            let e = parse_pairs(text).unwrap_err();
            assert!(e.contains(line) && e.contains(what), "{text:?}: {e}");
        }
    }
}
