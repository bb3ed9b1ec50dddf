//! `weir gen`: a generated table written as one file.

use std::io::Write;

use weir::gen::{ColumnGen, Dist, Shape, Skew, TableGen};
use weir::{Error, Result};

use super::args::{GenArgs, GenKind, GenScanArgs, GenSgdArgs};
pub use super::gen_join::gen_join;
use super::Outcome;

/// `weir gen`.
pub fn gen(a: GenArgs) -> Result<Outcome> {
    match a.kind {
        GenKind::Scan(s) => gen_scan(s),
        GenKind::Sgd(s) => gen_sgd(s),
        GenKind::Join(j) => gen_join(j),
    }
}

fn gen_scan(a: GenScanArgs) -> Result<Outcome> {
    let ty =
        a.ty.parse()
            .map_err(|e| Error::input(format!("--type: {e}")))?;
    let skew = match a.skew.as_str() {
        "uniform" => Skew::Uniform,
        "zipf" => Skew::Zipf {
            theta: a.theta,
            distinct: 1000,
        },
        o => {
            return Err(Error::input(format!(
                "--skew `{o}`: expected uniform or zipf"
            )))
        }
    };
    let (min, max) = if weir::table::ElemType::is_float(ty) {
        (a.lo - 10.0 * (a.hi - a.lo), a.hi + 10.0 * (a.hi - a.lo))
    } else {
        let (mn, mx) = ty.int_range();
        (mn as f64, mx as f64)
    };
    let col = ColumnGen {
        name: "v".into(),
        ty,
        dist: Dist::Select {
            selectivity: a.selectivity,
            lo: a.lo,
            hi: a.hi,
            min,
            max,
            skew,
        },
        corners: a.corners,
    };
    col.validate().map_err(Error::input)?;
    let g = TableGen {
        table: "scan".into(),
        rows: a.rows,
        seed: a.seed,
        shape: Shape::Columns(vec![col]),
    };
    let table = g.generate(0..a.rows);
    let hits = {
        let c = &table.columns[0];
        (0..c.len())
            .filter(|&r| match weir::kernels::value_at(c, r) {
                weir::kernels::predicate::Value::U(v) => (v as f64) >= a.lo && (v as f64) < a.hi,
                weir::kernels::predicate::Value::I(v) => (v as f64) >= a.lo && (v as f64) < a.hi,
                weir::kernels::predicate::Value::F(v) => v >= a.lo && v < a.hi,
            })
            .count()
    };
    let bytes = match a.out.extension().and_then(|e| e.to_str()) {
        Some("csv") => {
            let mut v = Vec::new();
            weir::table::write_csv(&mut v, &table).map_err(|e| Error::io(&a.out, e))?;
            v
        }
        Some("npy") => {
            let mut v = Vec::new();
            weir::table::write_npy_column(&mut v, &table.columns[0])
                .map_err(|e| Error::io(&a.out, e))?;
            v
        }
        Some("bin") => weir::table::bin_column_bytes(&table.columns[0]),
        _ => {
            return Err(Error::input(format!(
                "{}: --out must end in .csv, .npy or .bin",
                a.out.display()
            )))
        }
    };
    write_file_atomic(&a.out, &bytes, a.force)?;
    say!(
        "wrote {} rows of {ty} to {}: selectivity of {} <= v < {}: requested {:.4}%, achieved {:.4}%",
        a.rows,
        a.out.display(),
        a.lo,
        a.hi,
        a.selectivity * 100.0,
        hits as f64 * 100.0 / a.rows.max(1) as f64
    );
    Ok(Outcome::Ok)
}

/// `PREFIX.x.npy` (n × d `f32`) and `PREFIX.y.npy` of `data`.
pub fn sgd_npy(
    prefix: &std::path::Path,
    data: &weir::kernels::sgd::SgdData,
    force: bool,
) -> Result<()> {
    let (n, d) = (data.rows() as u64, data.dims() as u64);
    let x: Vec<u8> = data.features.iter().flat_map(|v| v.to_le_bytes()).collect();
    let y: Vec<u8> = data.labels.iter().flat_map(|v| v.to_le_bytes()).collect();
    for (ext, shape, bytes) in [("x.npy", vec![n, d], x), ("y.npy", vec![n], y)] {
        let path = prefix.with_extension(ext);
        let mut v = Vec::new();
        weir::npy::write_npy(&mut v, "<f4", &shape, &bytes).map_err(|e| Error::io(&path, e))?;
        write_file_atomic(&path, &v, force)?;
    }
    Ok(())
}

fn gen_sgd(a: GenSgdArgs) -> Result<Outcome> {
    use weir::gen::sgd::{Labels, SamplesGen};
    let labels = Labels::parse(&a.labels).ok_or_else(|| {
        Error::input(format!(
            "--labels `{}`: expected regression, logistic or margin",
            a.labels
        ))
    })?;
    if a.rows == 0 || a.dims == 0 || a.scale.iter().any(|s| !s.is_finite()) || !a.noise.is_finite()
    {
        return Err(Error::input(
            "--rows and --dims must be at least 1; --scale and --noise finite",
        ));
    }
    let g = SamplesGen {
        rows: a.rows,
        dims: a.dims,
        seed: a.seed,
        scale: a.scale.clone(),
        noise: a.noise,
        bias: a.bias,
        labels,
    };
    let out = g.generate();
    let wpath = a.out.with_extension("weights.json");
    if wpath.exists() && !a.force {
        return Err(Error::exists(format!(
            "{} exists; add --force to replace it",
            wpath.display()
        )));
    }
    sgd_npy(&a.out, &out.data, a.force)?;
    let json = serde_json::json!({ "weights": out.weights, "bias": out.bias, "seed": a.seed, "labels": a.labels });
    write_file_atomic(
        &wpath,
        (serde_json::to_string_pretty(&json).expect("json") + "\n").as_bytes(),
        a.force,
    )?;
    say!(
        "wrote {} samples of {} f32 features to {} and {}; true weights in {}",
        a.rows,
        a.dims,
        a.out.with_extension("x.npy").display(),
        a.out.with_extension("y.npy").display(),
        wpath.display()
    );
    Ok(Outcome::Ok)
}

/// Writes `bytes` to a temporary sibling of `path`, then renames it into place; refuses
/// an existing `path` without `force`.
pub fn write_file_atomic(path: &std::path::Path, bytes: &[u8], force: bool) -> Result<()> {
    if path.exists() && !force {
        return Err(Error::exists(format!(
            "{} exists; add --force to replace it",
            path.display()
        )));
    }
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_default();
    let tmp = path.with_file_name(format!(".{name}.weir-partial-{}", std::process::id()));
    let mut f = std::fs::File::create(&tmp).map_err(|e| Error::io(&tmp, e))?;
    f.write_all(bytes).map_err(|e| Error::io(&tmp, e))?;
    f.sync_all().map_err(|e| Error::io(&tmp, e))?;
    std::fs::rename(&tmp, path).map_err(|e| Error::io(path, e))
}
