//! The words and shapes of a bearing fix's output.

use pim_core::fix::Method;

/// The estimator's name as a reader knows it.
pub fn method_name(m: Method) -> &'static str {
    match m {
        Method::Ml => "maximum likelihood",
        Method::Ls => "least-squares intersection",
        Method::Robust => "robust M-estimate",
    }
}
