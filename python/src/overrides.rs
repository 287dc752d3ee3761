//! Parameter overrides from Python: `(name, value, unit)` where a unit such as `/M/s` or `nM`
//! makes a quantity and no unit reads the value in the unit the file wrote for that name.

use copyloop::network::{units, Dim, Override, Overrides, Quantity};
use pyo3::exceptions::PyValueError;
use pyo3::PyResult;

/// The factor and dimension of a unit product such as `/M/s`, `1/s`, `nM` or `M*s`.
fn unit_product(text: &str) -> PyResult<(f64, Dim)> {
    let mut factor = 1.0;
    let mut dim = Dim::NONE;
    let mut divide = false;
    let mut token = String::new();
    let mut apply = |name: &str, divide: bool| -> PyResult<()> {
        if name.is_empty() || name == "1" {
            return Ok(());
        }
        let (f, d) = units::unit(name)
            .ok_or_else(|| PyValueError::new_err(format!("unknown unit {name:?} in {text:?}")))?;
        if divide {
            factor /= f;
            dim = dim.per(d);
        } else {
            factor *= f;
            dim = dim.times(d);
        }
        Ok(())
    };
    for c in text.chars() {
        match c {
            '/' | '*' | ' ' => {
                apply(&token, divide)?;
                token.clear();
                if c != ' ' {
                    divide = c == '/';
                }
            }
            _ => token.push(c),
        }
    }
    apply(&token, divide)?;
    Ok((factor, dim))
}

/// The library's overrides for a list of `(name, value, unit)`.
pub fn build(list: &[(String, f64, Option<String>)]) -> PyResult<Overrides> {
    let mut o = Overrides::default();
    for (name, value, unit) in list {
        if !value.is_finite() {
            return Err(PyValueError::new_err(format!(
                "{name}: expected a finite number, got {value}"
            )));
        }
        let v = match unit.as_deref().map(str::trim) {
            None | Some("") => Override::Bare(*value),
            Some(u) => {
                let (f, d) = unit_product(u)?;
                Override::Quantity(Quantity::new(value * f, d))
            }
        };
        o = o.set(name, v);
    }
    Ok(o)
}
