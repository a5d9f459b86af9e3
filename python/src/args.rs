//! Keyword arguments into the library's plain option structs.
//!
//! Only conversion of Python values happens here (a float, an integer, one
//! of a few words); the ranges and combinations are checked by the library,
//! as for the command line. Every error names the keyword argument.

use pinflow::core::system::System;
use pinflow::flow::competitors::CompetitorOptions;
use pinflow::flow::options::{Closure, FlowOverrides};
use pinflow::model::Wires;
use pinflow::scan::figures::ColorBy;
use pinflow::search::{ChargeFilter, MomentumFilter, SpinFilter, SymmetryChoice};
use pyo3::prelude::*;
use pyo3::types::PyDict;

use crate::errors::input;

/// The keyword arguments that are flow options (the flags of
/// `pinflow flow`, with `_` for `-`; `competitor_symmetry` for
/// `--competitor-symmetry`).
pub const FLOW_OPTIONS: [&str; 15] = [
    "competitors",
    "competitor_coupling",
    "competitor_range",
    "competitor_symmetry",
    "ell_max",
    "y_strong",
    "floor",
    "closure",
    "closure_bound",
    "closure_range",
    "rtol",
    "atol",
    "max_steps",
    "q_points",
    "stages",
];

/// `{name: value}` as `(name, value)` overrides of the model's defaults.
pub fn point_overrides(point: &Bound<'_, PyDict>) -> PyResult<Vec<(String, f64)>> {
    let mut out = Vec::with_capacity(point.len());
    for (k, v) in point.iter() {
        let name: String = k
            .extract()
            .map_err(|_| input("point", "parameter names must be strings"))?;
        let x: f64 = v.extract().map_err(|_| {
            input(
                &name,
                &format!("expected a number for the parameter `{name}`"),
            )
        })?;
        out.push((name, x));
    }
    Ok(out)
}

fn float(d: &Bound<'_, PyDict>, key: &str) -> PyResult<Option<f64>> {
    match d.get_item(key)? {
        None => Ok(None),
        Some(v) if v.is_none() => Ok(None),
        Some(v) => v
            .extract()
            .map(Some)
            .map_err(|_| input(key, "expected a number")),
    }
}

fn int(d: &Bound<'_, PyDict>, key: &str) -> PyResult<Option<i64>> {
    match d.get_item(key)? {
        None => Ok(None),
        Some(v) if v.is_none() => Ok(None),
        Some(v) => v
            .extract()
            .map(Some)
            .map_err(|_| input(key, "expected a whole number")),
    }
}

/// `symmetry`: "all", "none", or symmetry names (a list, or a string
/// with commas).
pub fn symmetry(v: Option<&Bound<'_, PyAny>>, key: &str) -> PyResult<SymmetryChoice> {
    let Some(v) = v.filter(|v| !v.is_none()) else {
        return Ok(SymmetryChoice::All);
    };
    let names: Vec<String> = match v.extract::<String>() {
        Ok(s) if s.trim() == "all" => return Ok(SymmetryChoice::All),
        Ok(s) if s.trim() == "none" => return Ok(SymmetryChoice::None),
        Ok(s) => s.split(',').map(|n| n.trim().to_string()).collect(),
        Err(_) => v.extract().map_err(|_| {
            input(
                key,
                "expected \"all\", \"none\" or a list of symmetry names",
            )
        })?,
    };
    if names.iter().any(|n| n.is_empty()) {
        return Err(input(
            key,
            "expected \"all\", \"none\" or a list of symmetry names",
        ));
    }
    Ok(SymmetryChoice::Names(names))
}

/// Hunted competitors: the keyword arguments over the model's
/// [competitors] table (None: off), as `pinflow flow --competitors ...`.
pub fn competitors(
    sys: &System,
    options: &Bound<'_, PyDict>,
) -> PyResult<Option<CompetitorOptions>> {
    let delta = float(options, "competitors")?;
    let coupling = float(options, "competitor_coupling")?;
    if coupling.is_some_and(|y| !y.is_finite()) {
        return Err(input(
            "competitor_coupling",
            "expected a finite number (a bare coupling y)",
        ));
    }
    let range = wires(options.get_item("competitor_range")?, "competitor_range")?;
    let sym = symmetry(
        options.get_item("competitor_symmetry")?.as_ref(),
        "competitor_symmetry",
    )?;
    let opts = CompetitorOptions::resolve(&sys.model, delta, coupling, range)
        .map_err(|e| crate::errors::to_py(e.into(), &sys.model.file))?;
    Ok(opts.map(|o| CompetitorOptions { symmetry: sym, ..o }))
}

/// The competitor options as the command line records them in its
/// provenance (the values given, before the model's `[competitors]` table).
pub fn recorded_competitors(options: &Bound<'_, PyDict>) -> PyResult<serde_json::Value> {
    let range = wires(options.get_item("competitor_range")?, "competitor_range")?;
    let sym = symmetry(
        options.get_item("competitor_symmetry")?.as_ref(),
        "competitor_symmetry",
    )?;
    Ok(serde_json::json!({
        "competitors": float(options, "competitors")?,
        "competitor_coupling": float(options, "competitor_coupling")?,
        "competitor_range": range,
        "competitor_symmetry": format!("{sym:?}"),
    }))
}

/// Refuse the competitor options where the command has none (`edges`).
pub fn no_competitors(options: &Bound<'_, PyDict>) -> PyResult<()> {
    for key in FLOW_OPTIONS.iter().filter(|k| k.starts_with("competitor")) {
        if options.contains(key)? {
            return Err(input(
                key,
                "hunted competitors are not part of edges; pin the terms with pin=[...]",
            ));
        }
    }
    Ok(())
}

/// The flow options among `options` (unknown keys are refused).
pub fn flow_overrides(options: &Bound<'_, PyDict>) -> PyResult<FlowOverrides> {
    for k in options.keys() {
        let k: String = k.extract()?;
        if !FLOW_OPTIONS.contains(&k.as_str()) {
            let known = FLOW_OPTIONS.join(", ");
            return Err(input(
                &k,
                &format!("unknown flow option `{k}` (known: {known})"),
            ));
        }
    }
    let closure = match options.get_item("closure")? {
        None => None,
        Some(v) if v.is_none() => None,
        Some(v) => Some(match v.extract::<String>().ok().as_deref() {
            Some("pairs") => Closure::Pairs,
            Some("none") => Closure::None,
            _ => return Err(input("closure", "expected \"pairs\" or \"none\"")),
        }),
    };
    Ok(FlowOverrides {
        ell_max: float(options, "ell_max")?,
        y_strong: float(options, "y_strong")?,
        floor: float(options, "floor")?,
        closure,
        closure_bound: float(options, "closure_bound")?,
        closure_range: int(options, "closure_range")?,
        rtol: float(options, "rtol")?,
        atol: float(options, "atol")?,
        max_steps: int(options, "max_steps")?,
        q_points: int(options, "q_points")?,
        stages: int(options, "stages")?,
    })
}

/// What the phase map of a scan is coloured by.
pub fn color_by(word: &str) -> PyResult<ColorBy> {
    match word {
        "phase" => Ok(ColorBy::Phase),
        "winner" => Ok(ColorBy::Winner),
        _ => Err(input("color_by", "expected \"phase\" or \"winner\"")),
    }
}

/// `wires`: array sizes, each a whole number >= 1 or "infinite".
pub fn wire_counts(w: Option<Vec<Bound<'_, PyAny>>>) -> PyResult<Option<Vec<Wires>>> {
    let Some(w) = w else { return Ok(None) };
    let bad = || {
        input(
            "wires",
            "expected whole numbers of wires (>= 1) or \"infinite\"",
        )
    };
    let one = |v: &Bound<'_, PyAny>| match v.extract::<i64>() {
        Ok(n) if n >= 1 && !v.is_instance_of::<pyo3::types::PyBool>() => {
            Ok(Wires::Finite(n as usize))
        }
        Ok(_) => Err(bad()),
        Err(_) if v.extract::<String>().is_ok_and(|s| s == "infinite") => Ok(Wires::Infinite),
        Err(_) => Err(bad()),
    };
    w.iter().map(one).collect::<PyResult<Vec<_>>>().map(Some)
}

/// A number given as keyword argument `key`.
pub fn number(v: &Bound<'_, PyAny>, key: &str) -> PyResult<f64> {
    v.extract().map_err(|_| input(key, "expected a number"))
}

/// A whole number of wires >= 1 given as keyword argument `key` (None
/// stays None).
fn wires(v: Option<Bound<'_, PyAny>>, key: &str) -> PyResult<Option<usize>> {
    let Some(v) = v.filter(|v| !v.is_none()) else {
        return Ok(None);
    };
    match v.extract::<i64>() {
        Ok(w) if w >= 1 && !v.is_instance_of::<pyo3::types::PyBool>() => Ok(Some(w as usize)),
        _ => Err(input(
            key,
            "expected a number of consecutive wires (an integer >= 1)",
        )),
    }
}

/// `window`: wires at each end of an open array.
pub fn window(w: Option<Bound<'_, PyAny>>) -> PyResult<Option<usize>> {
    wires(w, "window")
}

/// The filters of `hunt`.
pub struct HuntFilters {
    pub charge: ChargeFilter,
    pub spin: SpinFilter,
    pub range: Option<usize>,
    pub momentum: Option<MomentumFilter>,
}

/// `charge` (an integer or "any"), `spin` (0 or "any"), `range` (>= 1),
/// `momentum` ("conserved" or "any").
pub fn hunt_filters(
    charge: &Bound<'_, PyAny>,
    spin: &Bound<'_, PyAny>,
    range: Option<Bound<'_, PyAny>>,
    momentum: Option<&str>,
) -> PyResult<HuntFilters> {
    let is_any = |v: &Bound<'_, PyAny>| v.extract::<String>().is_ok_and(|s| s == "any");
    let charge = match charge.extract::<i64>() {
        Ok(q) if !charge.is_instance_of::<pyo3::types::PyBool>() => ChargeFilter::Exactly(q),
        _ if is_any(charge) => ChargeFilter::Any,
        _ => return Err(input("charge", "expected an integer charge t.m or \"any\"")),
    };
    let spin = match spin.extract::<i64>() {
        Ok(0) if !spin.is_instance_of::<pyo3::types::PyBool>() => SpinFilter::Zero,
        _ if is_any(spin) => SpinFilter::Any,
        _ if spin.extract::<String>().is_ok_and(|s| s == "0") => SpinFilter::Zero,
        _ => return Err(input("spin", "expected 0 or \"any\"")),
    };
    let range = wires(range, "range")?;
    let momentum = match momentum {
        None => None,
        Some("conserved") => Some(MomentumFilter::Conserved),
        Some("any") => Some(MomentumFilter::Any),
        Some(_) => return Err(input("momentum", "expected \"conserved\" or \"any\"")),
    };
    Ok(HuntFilters {
        charge,
        spin,
        range,
        momentum,
    })
}

/// The arguments of a call as `name=value` strings for its provenance
/// block: the given `named` ones (those that are not None), then the
/// point's and the options' items in key order (`str()` of each value).
pub fn recorded(
    named: &[(&str, &Option<String>)],
    point: &Bound<'_, PyDict>,
    options: &Bound<'_, PyDict>,
) -> PyResult<Vec<String>> {
    let mut out: Vec<String> = named
        .iter()
        .filter_map(|(k, v)| v.as_ref().map(|v| format!("{k}={v}")))
        .collect();
    for dict in [point, options] {
        let mut items = Vec::new();
        for (k, v) in dict.iter() {
            items.push(format!("{}={}", k.str()?, v.str()?));
        }
        items.sort();
        out.extend(items);
    }
    Ok(out)
}
