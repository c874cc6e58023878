//! The Python module `causeway`: a thin layer over the library (lenses, images, caustics, maps,
//! finite-source magnifications, the store, photometry, fits, simulation) that speaks numpy.
//! Long calls release the GIL; vectorised calls check Ctrl-C between chunks.

mod convert;
mod fit;
mod lens;
mod light;
mod map;
mod nature;
mod parallax;
mod store;
mod timing;

use pyo3::prelude::*;

#[pymodule]
#[pyo3(name = "causeway")]
fn causeway_module(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add("__version__", env!("CARGO_PKG_VERSION"))?;
    m.add("MAP_METHODS", light::MAP_METHODS.to_vec())?;
    m.add("CONTOUR_METHODS", light::CONTOUR_METHODS.to_vec())?;
    m.add(
        "DEFAULT_ZERO_POINT",
        causeway::fit::photometry::DEFAULT_ZERO_POINT,
    )?;
    m.add("EXAMPLE_PLAN", causeway::fit::simulate::plan::EXAMPLE_PLAN)?;
    m.add("LENS_CLASSES", nature::class_names())?;
    m.add("NATURE_WEIGHT_FLOOR", nature::WEIGHT_FLOOR)?;
    m.add("LENS_NAMES", causeway::fit::scales::LENS_NAMES.to_vec())?;
    m.add_class::<lens::Lens>()?;
    m.add_class::<map::Map>()?;
    m.add_class::<store::Store>()?;
    m.add_class::<fit::DataSet>()?;
    m.add_function(wrap_pyfunction!(lens::magnification, m)?)?;
    m.add_function(wrap_pyfunction!(lens::images, m)?)?;
    m.add_function(wrap_pyfunction!(lens::caustics, m)?)?;
    m.add_function(wrap_pyfunction!(lens::topology, m)?)?;
    m.add_function(wrap_pyfunction!(map::build_map, m)?)?;
    m.add_function(wrap_pyfunction!(light::trajectory, m)?)?;
    m.add_function(wrap_pyfunction!(light::map_magnification, m)?)?;
    m.add_function(wrap_pyfunction!(light::contour_magnification, m)?)?;
    m.add_function(wrap_pyfunction!(light::model_magnification, m)?)?;
    m.add_function(wrap_pyfunction!(store::build_library, m)?)?;
    m.add_function(wrap_pyfunction!(fit::fit_single_lens, m)?)?;
    m.add_function(wrap_pyfunction!(fit::fit_event, m)?)?;
    m.add_function(wrap_pyfunction!(fit::simulate, m)?)?;
    m.add_function(wrap_pyfunction!(fit::simulate_plan, m)?)?;
    m.add_function(wrap_pyfunction!(nature::lens_nature, m)?)?;
    m.add_function(wrap_pyfunction!(parallax::sky_position, m)?)?;
    m.add_function(wrap_pyfunction!(parallax::sky_basis, m)?)?;
    m.add_function(wrap_pyfunction!(parallax::earth_position, m)?)?;
    m.add_function(wrap_pyfunction!(parallax::parallax_offsets, m)?)?;
    m.add_function(wrap_pyfunction!(parallax::earth_velocity, m)?)?;
    m.add_function(wrap_pyfunction!(parallax::lens_from_parallax, m)?)?;
    m.add_function(wrap_pyfunction!(parallax::refine_with_motion, m)?)?;
    m.add_function(wrap_pyfunction!(timing::_time_magnification, m)?)?;
    m.add_function(wrap_pyfunction!(timing::_time_map_magnification, m)?)?;
    Ok(())
}
