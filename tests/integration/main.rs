//! End-to-end tests of the `plinth` binary on small fixture portfolios, one module per topic.

mod demo;
mod fixture;
mod limits;
mod foundation;
mod metrics;
mod reports;
mod series;
mod works;
