//! Writes a [`Dataset`] as a NetCDF-3 file (and reads one back) with the pure-Rust `netcdf3`
//! crate, so that a run's gridded output opens in any CF-aware tool without a system netCDF
//! library on the machine that wrote it.

use std::path::Path;

use crate::{AttrValue, Dataset, ProductError, Variable};

/// Above this many bytes of data the 64-bit-offset variant is used instead of the classic one.
const CLASSIC_LIMIT_BYTES: usize = 1 << 30;

/// Writes `ds` to `path` as NetCDF-3 (classic, or 64-bit offset for large data), every variable
/// as f64, after [`Dataset::check`]. The file is written in place: the caller picks the path.
pub fn write_netcdf(ds: &Dataset, path: &Path) -> Result<(), ProductError> {
    ds.check().map_err(|e| e.in_file(path))?;
    let err = |what: &str, e: &dyn std::fmt::Debug| {
        ProductError::file(path, format!("NetCDF {what}: {e:?}"))
    };

    let mut nc = netcdf3::DataSet::new();
    for (name, len) in &ds.dimensions {
        nc.add_fixed_dim(name, *len).map_err(|e| err("dimension", &e))?;
    }
    for (name, value) in &ds.attributes {
        match value {
            AttrValue::Text(s) => nc.add_global_attr_string(name, s),
            AttrValue::Number(x) => nc.add_global_attr_f64(name, vec![*x]),
            AttrValue::Numbers(xs) => nc.add_global_attr_f64(name, xs.clone()),
        }
        .map_err(|e| err("global attribute", &e))?;
    }
    for var in &ds.variables {
        nc.add_var_f64(&var.name, &var.dimensions).map_err(|e| err("variable", &e))?;
        for (name, value) in &var.attributes {
            match value {
                AttrValue::Text(s) => nc.add_var_attr_string(&var.name, name, s),
                AttrValue::Number(x) => nc.add_var_attr_f64(&var.name, name, vec![*x]),
                AttrValue::Numbers(xs) => nc.add_var_attr_f64(&var.name, name, xs.clone()),
            }
            .map_err(|e| err("variable attribute", &e))?;
        }
    }

    let data_bytes: usize = ds.variables.iter().map(|v| v.data.len() * 8).sum();
    let version = if data_bytes < CLASSIC_LIMIT_BYTES {
        netcdf3::Version::Classic
    } else {
        netcdf3::Version::Offset64Bit
    };
    let mut writer = netcdf3::FileWriter::open(path).map_err(|e| err("open for writing", &e))?;
    writer.set_def(&nc, version, 0).map_err(|e| err("header", &e))?;
    for var in &ds.variables {
        writer.write_var_f64(&var.name, &var.data).map_err(|e| err("data", &e))?;
    }
    writer.close().map_err(|e| err("close", &e))
}

/// Reads a NetCDF-3 file into a [`Dataset`]; numeric data of any type becomes f64, char
/// attributes become text and numeric attributes one number or a list.
pub fn read_netcdf(path: &Path) -> Result<Dataset, ProductError> {
    let err = |what: &str, e: &dyn std::fmt::Debug| {
        ProductError::file(path, format!("NetCDF {what}: {e:?}"))
    };
    let mut reader = netcdf3::FileReader::open(path).map_err(|e| err("open for reading", &e))?;
    let nc = reader.data_set();
    let dimensions = nc.get_dims().iter().map(|d| (d.name(), d.size())).collect();
    let attributes = nc.get_global_attrs().into_iter().map(convert_attr).collect();
    let mut variables: Vec<Variable> = nc
        .get_vars()
        .into_iter()
        .map(|var| Variable {
            name: var.name().to_owned(),
            dimensions: var.dim_names(),
            data: Vec::new(),
            attributes: var.get_attrs().into_iter().map(convert_attr).collect(),
        })
        .collect();
    for var in &mut variables {
        var.data = match reader.read_var(&var.name).map_err(|e| err("data", &e))? {
            netcdf3::DataVector::I8(v) => v.into_iter().map(f64::from).collect(),
            netcdf3::DataVector::U8(v) => v.into_iter().map(f64::from).collect(),
            netcdf3::DataVector::I16(v) => v.into_iter().map(f64::from).collect(),
            netcdf3::DataVector::I32(v) => v.into_iter().map(f64::from).collect(),
            netcdf3::DataVector::F32(v) => v.into_iter().map(f64::from).collect(),
            netcdf3::DataVector::F64(v) => v,
        };
    }
    Ok(Dataset { dimensions, variables, attributes })
}

/// One NetCDF attribute as a name and an [`AttrValue`].
fn convert_attr(attr: &netcdf3::Attribute) -> (String, AttrValue) {
    let numbers: Vec<f64> = if let Some(v) = attr.get_f64() {
        v.to_vec()
    } else if let Some(v) = attr.get_f32() {
        v.iter().map(|&x| f64::from(x)).collect()
    } else if let Some(v) = attr.get_i32() {
        v.iter().map(|&x| f64::from(x)).collect()
    } else if let Some(v) = attr.get_i16() {
        v.iter().map(|&x| f64::from(x)).collect()
    } else if let Some(v) = attr.get_i8() {
        v.iter().map(|&x| f64::from(x)).collect()
    } else {
        let text = attr.get_as_string().unwrap_or_else(|| {
            String::from_utf8_lossy(attr.get_u8().unwrap_or_default()).into_owned()
        });
        return (attr.name().to_owned(), AttrValue::Text(text));
    };
    let value = if numbers.len() == 1 {
        AttrValue::Number(numbers[0])
    } else {
        AttrValue::Numbers(numbers)
    };
    (attr.name().to_owned(), value)
}
