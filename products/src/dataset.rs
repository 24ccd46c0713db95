//! An in-memory dataset shaped like a NetCDF file (dimensions, f64 variables, attributes), so the
//! host can assemble its products without knowing the file format, and so they can be checked
//! against the CF rules this crate relies on before anything is written.

use crate::ProductError;

/// The global `Conventions` value that [`Dataset::new`] sets.
pub const CF_CONVENTIONS: &str = "CF-1.8";

/// The value of an attribute: text, one number or a list of numbers (stored as f64).
#[derive(Debug, Clone, PartialEq)]
pub enum AttrValue {
    /// A character string, e.g. `units = "m-3"`.
    Text(String),
    /// A single number, e.g. `scale = 1.0`.
    Number(f64),
    /// Several numbers, e.g. `valid_range = [0, 90]`; one value reads back as [`AttrValue::Number`].
    Numbers(Vec<f64>),
}

impl AttrValue {
    /// The text, if this is a text attribute.
    pub fn as_text(&self) -> Option<&str> {
        match self {
            AttrValue::Text(s) => Some(s),
            _ => None,
        }
    }

    /// The number, if this is a single-number attribute (or a list of one).
    pub fn as_number(&self) -> Option<f64> {
        match self {
            AttrValue::Number(x) => Some(*x),
            AttrValue::Numbers(v) if v.len() == 1 => Some(v[0]),
            _ => None,
        }
    }
}

impl From<&str> for AttrValue {
    fn from(s: &str) -> Self {
        AttrValue::Text(s.to_owned())
    }
}

impl From<String> for AttrValue {
    fn from(s: String) -> Self {
        AttrValue::Text(s)
    }
}

impl From<f64> for AttrValue {
    fn from(x: f64) -> Self {
        AttrValue::Number(x)
    }
}

impl From<Vec<f64>> for AttrValue {
    fn from(v: Vec<f64>) -> Self {
        AttrValue::Numbers(v)
    }
}

/// A named f64 array over named dimensions, with its attributes.
#[derive(Debug, Clone, PartialEq)]
pub struct Variable {
    /// Variable name (a valid NetCDF name).
    pub name: String,
    /// Dimension names, slowest-varying first.
    pub dimensions: Vec<String>,
    /// Values, row-major in the order of `dimensions`; NaN marks a missing value.
    pub data: Vec<f64>,
    /// Attributes in the order they are written (`units` is required).
    pub attributes: Vec<(String, AttrValue)>,
}

impl Variable {
    /// A variable with the given dimensions, data and `units`.
    pub fn new(name: &str, dimensions: &[&str], data: Vec<f64>, units: &str) -> Self {
        Self {
            name: name.to_owned(),
            dimensions: dimensions.iter().map(|d| (*d).to_owned()).collect(),
            data,
            attributes: vec![("units".to_owned(), units.into())],
        }
    }

    /// A coordinate variable: one dimension of its own name, with `units` and `long_name`.
    pub fn coordinate(name: &str, data: Vec<f64>, units: &str, long_name: &str) -> Self {
        Self::new(name, &[name], data, units).with("long_name", long_name)
    }

    /// The same variable with one more attribute (replacing one of the same name).
    pub fn with(mut self, name: &str, value: impl Into<AttrValue>) -> Self {
        let value = value.into();
        match self.attributes.iter_mut().find(|(n, _)| n == name) {
            Some(slot) => slot.1 = value,
            None => self.attributes.push((name.to_owned(), value)),
        }
        self
    }

    /// The attribute called `name`, if present.
    pub fn attribute(&self, name: &str) -> Option<&AttrValue> {
        self.attributes.iter().find(|(n, _)| n == name).map(|(_, v)| v)
    }

    /// True if this is a coordinate variable (one dimension, named like the variable).
    pub fn is_coordinate(&self) -> bool {
        self.dimensions.len() == 1 && self.dimensions[0] == self.name
    }
}

/// A whole NetCDF-shaped dataset: dimensions, variables and global attributes.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Dataset {
    /// Dimension names and lengths, in definition order.
    pub dimensions: Vec<(String, usize)>,
    /// Variables in definition order.
    pub variables: Vec<Variable>,
    /// Global attributes in definition order (`Conventions` is required).
    pub attributes: Vec<(String, AttrValue)>,
}

impl Dataset {
    /// An empty dataset with `Conventions = "CF-1.8"` and the given `title`.
    pub fn new(title: &str) -> Self {
        Self {
            dimensions: Vec::new(),
            variables: Vec::new(),
            attributes: vec![
                ("Conventions".to_owned(), CF_CONVENTIONS.into()),
                ("title".to_owned(), title.into()),
            ],
        }
    }

    /// Adds (or replaces) a global attribute.
    pub fn set_attribute(&mut self, name: &str, value: impl Into<AttrValue>) {
        let value = value.into();
        match self.attributes.iter_mut().find(|(n, _)| n == name) {
            Some(slot) => slot.1 = value,
            None => self.attributes.push((name.to_owned(), value)),
        }
    }

    /// Adds a dimension of length `len`.
    pub fn add_dimension(&mut self, name: &str, len: usize) {
        self.dimensions.push((name.to_owned(), len));
    }

    /// Adds a dimension together with its coordinate variable (length = `values.len()`).
    pub fn add_coordinate(&mut self, coordinate: Variable) {
        self.dimensions.push((coordinate.name.clone(), coordinate.data.len()));
        self.variables.push(coordinate);
    }

    /// Adds a variable.
    pub fn add_variable(&mut self, variable: Variable) {
        self.variables.push(variable);
    }

    /// The variable called `name`, if present.
    pub fn variable(&self, name: &str) -> Option<&Variable> {
        self.variables.iter().find(|v| v.name == name)
    }

    /// The global attribute called `name`, if present.
    pub fn attribute(&self, name: &str) -> Option<&AttrValue> {
        self.attributes.iter().find(|(n, _)| n == name).map(|(_, v)| v)
    }

    /// The length of dimension `name`, if defined.
    pub fn dimension_len(&self, name: &str) -> Option<usize> {
        self.dimensions.iter().find(|(n, _)| n == name).map(|(_, l)| *l)
    }

    /// The variable whose `bounds` attribute names `name`, if any (then `name` is a CF
    /// boundary variable).
    pub fn bounds_parent(&self, name: &str) -> Option<&Variable> {
        self.variables
            .iter()
            .find(|v| v.attribute("bounds").and_then(AttrValue::as_text) == Some(name))
    }

    /// Checks the dataset can be written as CF NetCDF-3: valid unique names, every variable's
    /// dimensions defined and used once, data length = product of dimension lengths, a text
    /// `units` attribute on every variable ("1" when dimensionless) except boundary variables,
    /// which must have none and their parent's dimensions plus a vertex dimension (CF 1.8
    /// section 7.1), every variable named by `bounds`, `cell_measures` or `coordinates`
    /// present, coordinate data finite and strictly monotonic, and a global `Conventions`
    /// attribute. The first problem is reported.
    pub fn check(&self) -> Result<(), ProductError> {
        let fail = |m: String| Err(ProductError::content(m));
        for (i, (name, len)) in self.dimensions.iter().enumerate() {
            if !netcdf3::is_valid_name(name) {
                return fail(format!("dimension name {name:?} is not a valid NetCDF name"));
            }
            if self.dimensions[..i].iter().any(|(n, _)| n == name) {
                return fail(format!("dimension `{name}` is defined twice"));
            }
            if *len == 0 {
                return fail(format!(
                    "dimension `{name}` has length 0; NetCDF-3 fixed dimensions need at least 1"
                ));
            }
        }
        match self.attribute("Conventions") {
            Some(AttrValue::Text(c)) if c.starts_with("CF-") => {}
            _ => {
                return fail(format!(
                    "global attribute `Conventions` must be \"{CF_CONVENTIONS}\""
                ));
            }
        }
        check_attributes("global attributes", &self.attributes)?;
        for (i, var) in self.variables.iter().enumerate() {
            let name = &var.name;
            if !netcdf3::is_valid_name(name) {
                return fail(format!("variable name {name:?} is not a valid NetCDF name"));
            }
            if self.variables[..i].iter().any(|v| &v.name == name) {
                return fail(format!("variable `{name}` is defined twice"));
            }
            let mut expected = 1usize;
            for (j, dim) in var.dimensions.iter().enumerate() {
                if var.dimensions[..j].contains(dim) {
                    return fail(format!("variable `{name}` uses dimension `{dim}` twice"));
                }
                match self.dimension_len(dim) {
                    Some(len) => expected *= len,
                    None => {
                        return fail(format!(
                            "variable `{name}` uses dimension `{dim}`, which is not defined"
                        ));
                    }
                }
            }
            if var.data.len() != expected {
                let shape: Vec<String> = var
                    .dimensions
                    .iter()
                    .map(|d| format!("{d}={}", self.dimension_len(d).unwrap_or(0)))
                    .collect();
                return fail(format!(
                    "variable `{name}` has {} values but its dimensions ({}) need {expected}",
                    var.data.len(),
                    shape.join(", ")
                ));
            }
            if let Some(parent) = self.bounds_parent(name) {
                // CF Conventions 1.8, section 7.1 (cell boundaries): a boundary variable has
                // its parent's dimensions plus a trailing vertex dimension, and takes its units
                // from the parent, so it carries none of its own.
                let ok = var.dimensions.len() == parent.dimensions.len() + 1
                    && var.dimensions[..parent.dimensions.len()] == parent.dimensions[..];
                if !ok {
                    return fail(format!(
                        "bounds variable `{name}` of `{}` has dimensions {:?}; it needs `{}`'s \
                         dimensions {:?} plus one vertex dimension",
                        parent.name, var.dimensions, parent.name, parent.dimensions
                    ));
                }
                if var.attribute("units").is_some() {
                    return fail(format!(
                        "bounds variable `{name}` has a `units` attribute; CF 1.8 section 7.1 \
                         gives it the units of `{}`, so leave it out",
                        parent.name
                    ));
                }
                check_attributes(&format!("variable `{name}`"), &var.attributes)?;
                continue;
            }
            for key in ["bounds", "cell_measures", "coordinates"] {
                if let Some(AttrValue::Text(t)) = var.attribute(key) {
                    for word in t.split_whitespace().filter(|w| !w.ends_with(':')) {
                        if self.variable(word).is_none() {
                            return fail(format!(
                                "variable `{name}`: attribute `{key}` names `{word}`, which is \
                                 not a variable of the dataset"
                            ));
                        }
                    }
                }
            }
            match var.attribute("units") {
                Some(AttrValue::Text(u)) if !u.is_empty() => {}
                Some(_) => {
                    return fail(format!(
                        "variable `{name}`: attribute `units` must be non-empty text (\"1\" if dimensionless)"
                    ));
                }
                None => {
                    return fail(format!(
                        "variable `{name}` has no `units` attribute (use \"1\" if dimensionless)"
                    ));
                }
            }
            check_attributes(&format!("variable `{name}`"), &var.attributes)?;
            if var.is_coordinate() {
                if var.data.iter().any(|x| !x.is_finite()) {
                    return fail(format!("coordinate variable `{name}` has non-finite values"));
                }
                let up = var.data.windows(2).all(|w| w[1] > w[0]);
                let down = var.data.windows(2).all(|w| w[1] < w[0]);
                if !(up || down) {
                    return fail(format!("coordinate variable `{name}` is not strictly monotonic"));
                }
            }
        }
        Ok(())
    }
}

/// Attribute names valid and unique, number lists non-empty.
fn check_attributes(owner: &str, attributes: &[(String, AttrValue)]) -> Result<(), ProductError> {
    for (i, (name, value)) in attributes.iter().enumerate() {
        if !netcdf3::is_valid_name(name) {
            return Err(ProductError::content(format!(
                "{owner}: attribute name {name:?} is not a valid NetCDF name"
            )));
        }
        if attributes[..i].iter().any(|(n, _)| n == name) {
            return Err(ProductError::content(format!(
                "{owner}: attribute `{name}` appears twice"
            )));
        }
        if matches!(value, AttrValue::Numbers(v) if v.is_empty()) {
            return Err(ProductError::content(format!(
                "{owner}: attribute `{name}` is an empty list of numbers"
            )));
        }
    }
    Ok(())
}

/// `data` laid out row-major as `[a][b][inner]` (`n_a` x `n_b` blocks of `inner` values),
/// returned laid out as `[b][a][inner]`: swaps the two outermost axes of an array, e.g. to
/// put dimensions in the order a file needs. Its own inverse with `n_a` and `n_b` swapped.
/// Panics if `data.len() != n_a * n_b * inner`.
pub fn swap_outer_axes(data: &[f64], n_a: usize, n_b: usize, inner: usize) -> Vec<f64> {
    assert_eq!(data.len(), n_a * n_b * inner, "swap_outer_axes: data length");
    let mut out = Vec::with_capacity(data.len());
    for b in 0..n_b {
        for a in 0..n_a {
            let at = (a * n_b + b) * inner;
            out.extend_from_slice(&data[at..at + inner]);
        }
    }
    out
}
