//! The NetCDF product end to end: a dataset shaped like the host's density(alt, lt, lat) is
//! written, read back with the same crate and compared; bad datasets are refused with messages
//! that say what is wrong; and, where xarray is installed, the Python check opens the file.

mod common;

use std::process::Command;

use common::Scratch;
use exobound_products::{AttrValue, Dataset, Variable, read_netcdf, write_netcdf};

/// A small density(alt, lt, lat) + column(lt, lat) dataset with every kind of attribute.
fn sample() -> Dataset {
    let alt = vec![0.0, 100.0, 300.0];
    let lt: Vec<f64> = (0..4).map(|i| 3.0 + 6.0 * f64::from(i)).collect();
    let lat = vec![-60.0, 0.0, 60.0];
    let mut ds = Dataset::new("exobound test run");
    ds.set_attribute("source", "exobound-products integration test");
    ds.set_attribute("seed", 42.0);
    ds.add_coordinate(
        Variable::coordinate("alt", alt, "km", "altitude above the surface")
            .with("standard_name", "height")
            .with("positive", "up"),
    );
    ds.add_coordinate(Variable::coordinate("lt", lt, "h", "local solar time"));
    ds.add_coordinate(
        Variable::coordinate("lat", lat, "degrees_north", "latitude")
            .with("standard_name", "latitude")
            .with("valid_range", vec![-90.0, 90.0]),
    );
    let density: Vec<f64> =
        (0..36).map(|k| if k == 7 { f64::NAN } else { 1e9 * (1.0 + f64::from(k)) }).collect();
    ds.add_variable(
        Variable::new("density", &["alt", "lt", "lat"], density, "m-3")
            .with("long_name", "Na number density"),
    );
    ds.add_variable(
        Variable::new(
            "column",
            &["lt", "lat"],
            (0..12).map(|k| 1e15 * f64::from(k)).collect(),
            "m-2",
        )
        .with("long_name", "Na column density"),
    );
    ds.add_variable(Variable::new("escape_fraction", &[], vec![0.125], "1"));
    ds
}

/// Data equal bit for bit (so NaN equals NaN).
fn same_bits(a: &[f64], b: &[f64]) -> bool {
    a.len() == b.len() && a.iter().zip(b).all(|(x, y)| x.to_bits() == y.to_bits())
}

#[test]
fn round_trip_keeps_dimensions_data_and_attributes() {
    let scratch = Scratch::new("roundtrip");
    let path = scratch.join("run.nc");
    let ds = sample();
    ds.check().expect("sample is valid");
    write_netcdf(&ds, &path).expect("write");
    let back = read_netcdf(&path).expect("read");

    assert_eq!(back.dimensions, ds.dimensions);
    assert_eq!(back.attributes, ds.attributes);
    assert_eq!(back.variables.len(), ds.variables.len());
    for (a, b) in ds.variables.iter().zip(&back.variables) {
        assert_eq!(a.name, b.name);
        assert_eq!(a.dimensions, b.dimensions, "{}", a.name);
        assert_eq!(a.attributes, b.attributes, "{}", a.name);
        assert!(same_bits(&a.data, &b.data), "{} data changed", a.name);
    }
    assert_eq!(back.attribute("Conventions"), Some(&AttrValue::Text("CF-1.8".into())));
    assert!(back.variable("density").unwrap().data[7].is_nan());
    back.check().expect("what we read back is valid too");

    // The file starts with the NetCDF-3 classic magic "CDF\x01" (from memory: the netCDF
    // file format specification).
    let bytes = std::fs::read(&path).unwrap();
    assert_eq!(&bytes[..4], b"CDF\x01");
}

#[test]
fn check_refuses_wrong_data_length() {
    let mut ds = sample();
    ds.variables.iter_mut().find(|v| v.name == "column").unwrap().data.pop();
    let err = ds.check().unwrap_err().to_string();
    assert!(
        err.contains("`column`") && err.contains("11 values") && err.contains("need 12"),
        "{err}"
    );
    assert!(err.contains("lt=4") && err.contains("lat=3"), "{err}");
}

#[test]
fn check_refuses_missing_units() {
    let mut ds = sample();
    ds.variables
        .iter_mut()
        .find(|v| v.name == "density")
        .unwrap()
        .attributes
        .retain(|(n, _)| n != "units");
    let err = ds.check().unwrap_err().to_string();
    assert!(err.contains("`density`") && err.contains("no `units`"), "{err}");

    let mut ds = sample();
    let lat = ds.variables.iter_mut().find(|v| v.name == "lat").unwrap();
    lat.attributes.retain(|(n, _)| n != "units");
    let err = ds.check().unwrap_err().to_string();
    assert!(err.contains("`lat`") && err.contains("units"), "{err}");
}

#[test]
fn check_refuses_other_mistakes() {
    let mut ds = sample();
    ds.variables.push(Variable::new("flux", &["time"], vec![1.0], "m-2 s-1"));
    assert!(ds.check().unwrap_err().to_string().contains("`time`, which is not defined"));

    let mut ds = sample();
    ds.attributes.retain(|(n, _)| n != "Conventions");
    assert!(ds.check().unwrap_err().to_string().contains("Conventions"));

    let mut ds = sample();
    ds.variables.iter_mut().find(|v| v.name == "lt").unwrap().data.swap(0, 1);
    assert!(ds.check().unwrap_err().to_string().contains("not strictly monotonic"));

    let mut ds = sample();
    ds.add_dimension("empty", 0);
    assert!(ds.check().unwrap_err().to_string().contains("length 0"));

    let mut ds = sample();
    ds.variables.push(Variable::new("column", &[], vec![1.0], "1"));
    assert!(ds.check().unwrap_err().to_string().contains("defined twice"));
}

/// The sample with `alt_bounds(alt, nv)` named by `alt`'s `bounds` attribute.
fn with_bounds() -> Dataset {
    let mut ds = sample();
    ds.add_dimension("nv", 2);
    let alt = ds.variables.iter_mut().find(|v| v.name == "alt").unwrap();
    *alt = alt.clone().with("bounds", "alt_bounds");
    let mut b =
        Variable::new("alt_bounds", &["alt", "nv"], vec![0.0, 50.0, 50.0, 200.0, 200.0, 400.0], "");
    b.attributes.clear();
    ds.add_variable(b);
    ds
}

#[test]
fn bounds_variables_take_their_parents_units_and_shape() {
    // CF Conventions 1.8, section 7.1 (cell boundaries): no units of their own, the parent's
    // dimensions plus a vertex dimension.
    let ds = with_bounds();
    ds.check().expect("bounds without units are valid");
    let scratch = Scratch::new("bounds");
    let path = scratch.join("bounds.nc");
    write_netcdf(&ds, &path).unwrap();
    let back = read_netcdf(&path).unwrap();
    assert!(back.variable("alt_bounds").unwrap().attribute("units").is_none());
    assert_eq!(back.bounds_parent("alt_bounds").map(|v| v.name.as_str()), Some("alt"));
    back.check().unwrap();

    let mut ds = with_bounds();
    let b = ds.variables.iter_mut().find(|v| v.name == "alt_bounds").unwrap();
    *b = b.clone().with("units", "km");
    let err = ds.check().unwrap_err().to_string();
    assert!(err.contains("`alt_bounds`") && err.contains("`units`"), "{err}");

    let mut ds = with_bounds();
    let b = ds.variables.iter_mut().find(|v| v.name == "alt_bounds").unwrap();
    b.dimensions = vec!["nv".into(), "alt".into()];
    let err = ds.check().unwrap_err().to_string();
    assert!(err.contains("bounds variable `alt_bounds`") && err.contains("vertex"), "{err}");

    // A cell measure that names no variable is refused.
    let mut ds = with_bounds();
    let c = ds.variables.iter_mut().find(|v| v.name == "column").unwrap();
    *c = c.clone().with("cell_measures", "area: cell_area");
    let err = ds.check().unwrap_err().to_string();
    assert!(err.contains("`cell_area`") && err.contains("cell_measures"), "{err}");
}

#[test]
fn swapping_outer_axes_moves_whole_blocks_and_round_trips() {
    // [a][b][inner] with a = 2, b = 3, inner = 2: value = 100 a + 10 b + i.
    let data: Vec<f64> = (0..2)
        .flat_map(|a| {
            (0..3).flat_map(move |b| (0..2).map(move |i| f64::from(100 * a + 10 * b + i)))
        })
        .collect();
    let swapped = exobound_products::swap_outer_axes(&data, 2, 3, 2);
    let expected: Vec<f64> = (0..3)
        .flat_map(|b| {
            (0..2).flat_map(move |a| (0..2).map(move |i| f64::from(100 * a + 10 * b + i)))
        })
        .collect();
    assert_eq!(swapped, expected);
    assert_eq!(exobound_products::swap_outer_axes(&swapped, 3, 2, 2), data);
}

#[test]
fn write_refuses_a_bad_dataset_naming_the_file_and_writes_nothing() {
    let scratch = Scratch::new("refuse");
    let path = scratch.join("bad.nc");
    let mut ds = sample();
    ds.variables[3].data.push(0.0);
    let err = write_netcdf(&ds, &path).unwrap_err();
    assert_eq!(err.path(), Some(path.as_path()));
    assert!(err.to_string().starts_with(&path.display().to_string()), "{err}");
    assert!(!path.exists());
}

#[test]
fn read_reports_the_file_when_it_is_not_netcdf() {
    let scratch = Scratch::new("notnc");
    let path = scratch.join("plain.txt");
    std::fs::write(&path, "not a netcdf file").unwrap();
    let err = read_netcdf(&path).unwrap_err();
    assert!(err.to_string().contains("plain.txt"), "{err}");
}

/// Runs tests/python/check_netcdf.py on a written file when python3 has xarray and scipy.
/// Set EXOBOUND_REQUIRE_PYTHON_CHECK=1 (as CI should, after `pip install xarray scipy`) to
/// make a missing xarray a failure instead of a skip.
#[test]
fn python_xarray_check_accepts_the_file() {
    let required = std::env::var("EXOBOUND_REQUIRE_PYTHON_CHECK").is_ok_and(|v| v == "1");
    let has_xarray = Command::new("python3")
        .args(["-c", "import xarray, scipy"])
        .output()
        .is_ok_and(|o| o.status.success());
    if !has_xarray {
        assert!(!required, "EXOBOUND_REQUIRE_PYTHON_CHECK=1 but python3 lacks xarray/scipy");
        eprintln!("skipped: python3 has no xarray/scipy (pip install xarray scipy)");
        return;
    }
    let scratch = Scratch::new("python");
    let path = scratch.join("run.nc");
    write_netcdf(&sample(), &path).unwrap();
    let script = concat!(env!("CARGO_MANIFEST_DIR"), "/../tests/python/check_netcdf.py");
    let out = Command::new("python3")
        .arg(script)
        .arg(&path)
        .args(["density", "column", "escape_fraction", "alt", "lt", "lat"])
        .output()
        .expect("run python3");
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "check failed:\n{stdout}\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(stdout.contains("\"ok\": true") && stdout.contains("\"nan\": 1"), "{stdout}");
}
