//! Runs `clamber::timing::parameterize` on sampled paths read from a JSON file and prints
//! the results as JSON; used by `reference/toppra_check.py` to compare with toppra.
//!
//!   timing_dump CASES.json [--scale-limits F]
//!
//! Input: `{"cases": [{"name", "s", "dq", "ddq", "vmax", "amax", "sd_start", "sd_end",
//! "scheme"}]}` with scheme "collocation" (default) or "interpolation".
//! Output: `{"results": [{"name", "duration", "sd"}]}` or `{"name", "error"}` per case.
//! `--scale-limits F` multiplies every limit by F (the script's negative control).

use anyhow::{bail, Context, Result};
use clamber::timing::{parameterize_with, Discretization, PathSamples};
use serde_json::{json, Value};

fn floats(v: &Value, field: &str) -> Result<Vec<f64>> {
    v.get(field)
        .and_then(Value::as_array)
        .with_context(|| format!("field `{field}`: expected an array of numbers"))?
        .iter()
        .map(|x| {
            x.as_f64()
                .with_context(|| format!("field `{field}`: not a number"))
        })
        .collect()
}

fn rows(v: &Value, field: &str) -> Result<Vec<Vec<f64>>> {
    v.get(field)
        .and_then(Value::as_array)
        .with_context(|| format!("field `{field}`: expected an array of arrays"))?
        .iter()
        .map(|r| {
            r.as_array()
                .with_context(|| format!("field `{field}`: expected an array"))?
                .iter()
                .map(|x| {
                    x.as_f64()
                        .with_context(|| format!("field `{field}`: not a number"))
                })
                .collect()
        })
        .collect()
}

fn main() -> Result<()> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let (path, scale) = match args.as_slice() {
        [p] => (p.clone(), 1.0),
        [p, flag, f] if flag == "--scale-limits" => (p.clone(), f.parse::<f64>()?),
        _ => bail!("usage: timing_dump CASES.json [--scale-limits F]"),
    };
    let text = std::fs::read_to_string(&path).with_context(|| format!("reading {path}"))?;
    let doc: Value = serde_json::from_str(&text).with_context(|| format!("parsing {path}"))?;
    let cases = doc
        .get("cases")
        .and_then(Value::as_array)
        .context("field `cases`: expected an array")?;
    let mut results = Vec::new();
    for case in cases {
        let name = case.get("name").and_then(Value::as_str).unwrap_or("?");
        let samples = PathSamples {
            s: floats(case, "s")?,
            dq: rows(case, "dq")?,
            ddq: rows(case, "ddq")?,
        };
        let vmax: Vec<f64> = floats(case, "vmax")?.iter().map(|v| v * scale).collect();
        let amax: Vec<f64> = floats(case, "amax")?.iter().map(|v| v * scale).collect();
        let sd_start = case.get("sd_start").and_then(Value::as_f64).unwrap_or(0.0);
        let sd_end = case.get("sd_end").and_then(Value::as_f64).unwrap_or(0.0);
        let scheme = match case.get("scheme").and_then(Value::as_str) {
            None | Some("collocation") => Discretization::Collocation,
            Some("interpolation") => Discretization::Interpolation,
            Some(other) => bail!("case `{name}`: unknown scheme `{other}`"),
        };
        results.push(
            match parameterize_with(&samples, &vmax, &amax, sd_start, sd_end, scheme) {
                Ok(p) => json!({"name": name, "duration": p.duration, "sd": p.sd}),
                Err(e) => json!({"name": name, "error": e.to_string()}),
            },
        );
    }
    println!("{}", json!({ "results": results }));
    Ok(())
}
